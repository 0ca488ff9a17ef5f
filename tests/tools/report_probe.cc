// Exposes pieces of boldsum_report to the reference scripts:
//   report_probe colours                 -> the diverging scale: one "r g b" line per entry
//   report_probe whiteness CONFIG ID     -> per run and fitted voxel/region of subject ID
//                                           (fitted before, results in the config's output):
//                                           "run <k> <unit> <Q> <p>", then "share <s>"
//   report_probe world IMAGE i j k ...   -> "x y z" (mm) per voxel triple
//   report_probe peaks IMAGE COUNT       -> "value i j k x y z" per peak (maxima, minima)
//   report_probe png W H                 -> a data URI of a W x H test picture whose
//                                           pixel (x, y) is (x mod 256, y mod 256, (x+y) mod 256)
// Errors: message on stderr, exit status 2.
#include <cstdio>
#include <iostream>
#include <string>

#include "boldsum/config.h"
#include "boldsum/error.h"
#include "report/colour_scale.h"
#include "report/peaks.h"
#include "report/png_image.h"
#include "report/residual_whiteness.h"
#include "report/world_space.h"
#include "study/run_plan.h"

namespace {

using boldsum::Error;

int Whiteness(const std::string& config, const std::string& id) {
  boldsum::LoadedConfig loaded = boldsum::LoadConfig(config);
  if (loaded.diagnostics.HasErrors()) throw Error(config + ": invalid config");
  const boldsum::StudySpec& spec = loaded.spec;
  const std::vector<const boldsum::SubjectSpec*> subjects = boldsum::SelectSubjects(spec, {id});
  boldsum::Diagnostics diagnostics;
  const boldsum::SubjectPlan plan = boldsum::PlanSubject(spec, *subjects.front(), &diagnostics);
  if (diagnostics.HasErrors()) throw Error(id + ": cannot plan the subject");
  const boldsum::FitRecord record =
      boldsum::LoadFitRecord(boldsum::OutputRoot(spec, {}) + "/" + id + "/fit_params.bin");
  const boldsum::ResidualDiagnostics d = boldsum::MeasureResiduals(plan, record, spec.model.noise);
  for (size_t r = 0; r < d.runs.size(); ++r) {
    for (size_t v = 0; v < d.runs[r].q.size(); ++v) {
      std::printf("run %d %zu %.9g %.9g\n", plan.runs[r].index, v, d.runs[r].q[v], d.runs[r].p[v]);
    }
  }
  std::printf("share %.17g\n", d.share());
  return 0;
}

int Run(int argc, char** argv) {
  const std::string mode = argc > 1 ? argv[1] : "";
  if (mode == "colours" && argc == 2) {
    for (int i = 0; i < boldsum::kDivergingSize; ++i) {
      const boldsum::Rgb c = boldsum::DivergingEntry(i);
      std::printf("%d %d %d\n", c.r, c.g, c.b);
    }
    return 0;
  }
  if (mode == "whiteness" && argc == 4) return Whiteness(argv[2], argv[3]);
  if (mode == "world" && argc >= 3 && (argc - 3) % 3 == 0) {
    const boldsum::Affine a = boldsum::VoxelToWorld(boldsum::ReadImageGeometry(argv[2]));
    for (int i = 3; i < argc; i += 3) {
      const auto w = boldsum::WorldPosition(a, std::stod(argv[i]), std::stod(argv[i + 1]),
                                            std::stod(argv[i + 2]));
      std::printf("%.17g %.17g %.17g\n", w[0], w[1], w[2]);
    }
    return 0;
  }
  if (mode == "peaks" && argc == 4) {
    boldsum::ImageGeometry geometry;
    const std::vector<float> map = boldsum::ReadVolume(argv[2], &geometry);
    for (const boldsum::Peak& p : boldsum::FindPeaks(geometry, map, std::stoi(argv[3]), true)) {
      std::printf("%.9g %d %d %d %.17g %.17g %.17g\n", p.value, p.voxel[0], p.voxel[1], p.voxel[2],
                  p.world[0], p.world[1], p.world[2]);
    }
    return 0;
  }
  if (mode == "png" && argc == 4) {
    const int w = std::stoi(argv[2]), h = std::stoi(argv[3]);
    boldsum::RgbImage image(w, h);
    for (int y = 0; y < h; ++y) {
      for (int x = 0; x < w; ++x) {
        image.at(x, y) = {static_cast<uint8_t>(x % 256), static_cast<uint8_t>(y % 256),
                          static_cast<uint8_t>((x + y) % 256)};
      }
    }
    std::printf("%s\n", boldsum::PngDataUri(image).c_str());
    return 0;
  }
  throw Error(
      "usage: report_probe colours | whiteness CONFIG ID | world IMAGE i j k ... | "
      "peaks IMAGE COUNT | png W H");
}

}  // namespace

int main(int argc, char** argv) {
  try {
    return Run(argc, argv);
  } catch (const std::exception& error) {
    std::cerr << error.what() << "\n";
    return 2;
  }
}
