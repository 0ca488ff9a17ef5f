# Every dependency is a Debian 12 package; scripts/install-deps names them.
find_package(Eigen3 3.3 REQUIRED NO_MODULE)
find_package(yaml-cpp REQUIRED)            # 0.7 exports the plain target `yaml-cpp`
find_package(CLI11 CONFIG REQUIRED)
find_package(Boost REQUIRED CONFIG)        # Boost.Math is header-only
find_package(ZLIB REQUIRED)
find_package(PNG REQUIRED)                 # libpng: the report's PNG pictures
find_package(Threads REQUIRED)
find_package(PkgConfig REQUIRED)
pkg_check_modules(FFTW3 REQUIRED IMPORTED_TARGET fftw3)
pkg_check_modules(DEFLATE REQUIRED IMPORTED_TARGET libdeflate)
# ISA-L (libisal-dev): the streaming inflater of .nii.gz input, about twice zlib's speed.
pkg_check_modules(ISAL REQUIRED IMPORTED_TARGET libisal)

# Debian's NIFTIConfig.cmake points at library paths that do not exist, and there is
# no pkg-config file, so the imported target is built by hand. Only nifti2 is linked
# (it reads NIfTI-1 as well); nifti1_io.h and nifti2_io.h must never meet in one file.
find_path(NIFTI_INCLUDE_DIR nifti2_io.h PATH_SUFFIXES nifti REQUIRED)
find_library(NIFTI2_LIBRARY nifti2 REQUIRED)
find_library(ZNZ_LIBRARY znz REQUIRED)
add_library(boldsum::nifti INTERFACE IMPORTED)
set_target_properties(boldsum::nifti PROPERTIES
  INTERFACE_INCLUDE_DIRECTORIES "${NIFTI_INCLUDE_DIR}"
  INTERFACE_COMPILE_DEFINITIONS "HAVE_ZLIB"
  INTERFACE_LINK_LIBRARIES "${NIFTI2_LIBRARY};${ZNZ_LIBRARY};ZLIB::ZLIB;m")

if(BOLDSUM_TESTS)
  find_package(GTest CONFIG REQUIRED)
  find_package(rapidcheck CONFIG REQUIRED)  # Debian ships no version file
endif()
if(BOLDSUM_BENCHMARKS)
  find_package(benchmark REQUIRED)
endif()
