# Warnings for boldsum's own targets only; third-party headers come in as SYSTEM.
function(boldsum_warnings target)
  target_compile_options(${target} PRIVATE -Wall -Wextra -Wpedantic)
  if(BOLDSUM_WERROR)
    target_compile_options(${target} PRIVATE -Werror)
  endif()
endfunction()

if(BOLDSUM_SANITIZE)
  add_compile_options(-fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer)
  add_link_options(-fsanitize=address,undefined)
endif()

# boldsum_module(name DEPS ...): a static library from src/<name>/*.cc.
function(boldsum_module name)
  cmake_parse_arguments(ARG "" "" "DEPS" ${ARGN})
  file(GLOB sources CONFIGURE_DEPENDS ${PROJECT_SOURCE_DIR}/src/${name}/*.cc)
  add_library(boldsum_${name} STATIC ${sources})
  target_include_directories(boldsum_${name} PUBLIC
    ${PROJECT_SOURCE_DIR}/include ${PROJECT_SOURCE_DIR}/src)
  target_link_libraries(boldsum_${name} PUBLIC ${ARG_DEPS})
  target_compile_definitions(boldsum_${name} PUBLIC
    BOLDSUM_VERSION="${PROJECT_VERSION}" EIGEN_DONT_PARALLELIZE)
  boldsum_warnings(boldsum_${name})
endfunction()
