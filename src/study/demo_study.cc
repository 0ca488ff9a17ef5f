#include "study/demo_study.h"

#include <unistd.h>

#include <algorithm>
#include <array>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <random>

#include "boldsum/design.h"
#include "boldsum/error.h"
#include "boldsum/io.h"

namespace boldsum {
namespace {

namespace fs = std::filesystem;

constexpr double kPi = 3.14159265358979323846;
constexpr int kNx = 40, kNy = 48, kNz = 36;
constexpr int64_t kGridVoxels = int64_t{kNx} * kNy * kNz;
constexpr int kVolumes = 180;
constexpr double kTr = 2.0;
constexpr int kSubjects = 8;
constexpr int kRuns = 2;
constexpr int kConditions = 3;  // melody_known, melody_new, press (design order)
const char* const kConditionNames[kConditions] = {"melody_known", "melody_new", "press"};

// The brain: an ellipsoid centred on the grid (voxel coordinates; the affine puts the
// world origin at the centre), semi-axes in voxels.
constexpr double kCx = 19.5, kCy = 23.5, kCz = 17.5;
constexpr double kAx = 16.5, kAy = 20.5, kAz = 14.5;

struct RegionShape {
  const char* name;
  int x, y, z;  // centre voxel
};
// Spheres of radius 2.5 voxels: 81 voxels each (lattice points with d^2 <= 6).
constexpr double kRegionRadius = 2.5;
constexpr int kRegionCount = 4;
constexpr RegionShape kRegionShapes[kRegionCount] = {{"left_auditory", 7, 22, 17},
                                                     {"right_auditory", 32, 22, 17},
                                                     {"motor", 13, 27, 27},
                                                     {"control_region", 20, 8, 14}};

int64_t LinearIndex(int x, int y, int z) { return x + int64_t{kNx} * (y + int64_t{kNy} * z); }

// sqrt of the ellipsoid's quadratic form: < 1 inside the brain, 0 at its centre.
double BrainRadius(int x, int y, int z) {
  const double u = (x - kCx) / kAx, v = (y - kCy) / kAy, w = (z - kCz) / kAz;
  return std::sqrt(u * u + v * v + w * w);
}

// SplitMix64 (Steele, Lea & Flood 2014, OOPSLA): decorrelates the seeds of the streams.
uint64_t SplitMix64(uint64_t x) {
  x += 0x9E3779B97F4A7C15ULL;
  x = (x ^ (x >> 30)) * 0xBF58476D1CE4E5B9ULL;
  x = (x ^ (x >> 27)) * 0x94D049BB133111EBULL;
  return x ^ (x >> 31);
}

// Uniforms from the top 53 bits of mt19937_64 and normals by the Box-Muller transform
// (Box & Muller 1958, Ann. Math. Stat. 29:610), so the sequence does not depend on the
// standard library's distribution classes, which differ between implementations.
class Random {
 public:
  Random(uint64_t seed, uint64_t stream) : engine_(SplitMix64(seed ^ SplitMix64(stream))) {}

  double Uniform() { return static_cast<double>(engine_() >> 11) * 0x1.0p-53; }  // [0, 1)
  double Uniform(double lo, double hi) { return lo + (hi - lo) * Uniform(); }
  int Index(int n) { return std::min(n - 1, static_cast<int>(Uniform() * n)); }  // [0, n)
  int Tenths(double lo_s, double hi_s) {  // a time in [lo_s, hi_s] in whole tenths of a second
    return static_cast<int>(std::lround(10 * Uniform(lo_s, hi_s)));
  }

  double Normal() {
    if (has_spare_) {
      has_spare_ = false;
      return spare_;
    }
    const double radius = std::sqrt(-2.0 * std::log(1.0 - Uniform()));
    const double angle = 2.0 * kPi * Uniform();
    spare_ = radius * std::sin(angle);
    has_spare_ = true;
    return radius * std::cos(angle);
  }

 private:
  std::mt19937_64 engine_;
  bool has_spare_ = false;
  double spare_ = 0.0;
};

// Rounds to a multiple of 1/scale and clears negative zero, so that the value printed
// with log10(scale) decimals reads back as the value used to build the data.
double RoundTo(double value, double scale) { return std::round(value * scale) / scale + 0.0; }

std::string Format(const char* format, double value) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, format, value);
  return buffer;
}

std::string TenthsText(int tenths) {
  return std::to_string(tenths / 10) + "." + std::to_string(tenths % 10);
}

std::string SubjectId(int s) { return (s < 9 ? "s0" : "s") + std::to_string(s + 1); }

ImageGeometry DemoGeometry(int n_volumes) {
  ImageGeometry g;
  g.dims = {kNx, kNy, kNz};
  g.n_volumes = n_volumes;
  g.voxel_mm = {3.0, 3.0, 3.0};
  g.tr_s = n_volumes > 1 ? kTr : 0.0;
  g.qform_code = 1;  // scanner-based world coordinates
  g.sform_code = 1;
  g.qoffset_x = -3.0 * kCx;
  g.qoffset_y = -3.0 * kCy;
  g.qoffset_z = -3.0 * kCz;
  g.srow = {{{3, 0, 0, g.qoffset_x}, {0, 3, 0, g.qoffset_y}, {0, 0, 3, g.qoffset_z}}};
  return g;
}

ModelSpec DemoModel() {
  ModelSpec model;
  model.tr_s = kTr;
  model.slice_reference = 0.5;
  model.conditions.assign(kConditionNames, kConditionNames + kConditions);
  model.confounds = {"shift_x", "shift_y", "shift_z"};
  model.censor = CensorSpec{"displacement", 0.9};
  return model;
}

// Planted effects of one subject, in % signal change of the voxel's baseline.
struct SubjectTruth {
  double scale = 1.0;  // the subject's overall image intensity
  double percent[kRegionCount][kConditions] = {};
};

// Auditory regions respond to both kinds of melody, more to familiar ones except in the
// two subjects of `weak` (no reliable difference); the motor region responds to presses.
SubjectTruth DrawSubjectTruth(uint64_t seed, int s, bool weak) {
  Random random(seed, 100 + s);
  SubjectTruth truth;
  truth.scale = random.Uniform(0.9, 1.1);
  const double new_melody = 1.6 + 0.25 * random.Normal();
  const double difference =
      weak ? random.Uniform(-0.15, 0.05) : std::max(0.25, 0.6 + 0.15 * random.Normal());
  for (int r = 0; r < 2; ++r) {
    const double region_new = std::max(0.5, new_melody + 0.1 * random.Normal());
    const double region_difference =
        weak ? difference + 0.03 * random.Normal()
             : std::max(0.15, difference + 0.08 * random.Normal());
    truth.percent[r][0] = RoundTo(region_new + region_difference, 1e3);
    truth.percent[r][1] = RoundTo(region_new, 1e3);
  }
  truth.percent[2][2] = RoundTo(std::max(2.0, 5.0 + random.Normal()), 1e3);
  return truth;
}

struct Voxel {
  int64_t index;
  double baseline;                // mean intensity before noise
  double rho;                     // AR(1) coefficient of the noise
  double leak;                    // fraction of signal change per mm of motion
  std::array<double, 3> outward;  // unit direction of the motion leak
  int region;                     // -1 outside the regions
};

std::vector<Voxel> BrainVoxels(const SubjectTruth& truth) {
  std::vector<int> region_of(static_cast<size_t>(kGridVoxels), -1);
  const std::vector<DemoRegion> regions = DemoRegions();
  for (int r = 0; r < kRegionCount; ++r) {
    for (int64_t i : regions[r].voxels) region_of[static_cast<size_t>(i)] = r;
  }
  std::vector<Voxel> voxels;
  for (int z = 0; z < kNz; ++z) {
    for (int y = 0; y < kNy; ++y) {
      for (int x = 0; x < kNx; ++x) {
        const double radius = BrainRadius(x, y, z);
        if (radius > 1.0) continue;
        Voxel v;
        v.index = LinearIndex(x, y, z);
        const double texture =
            0.05 * std::sin(0.3 * x) * std::cos(0.25 * y) + 0.03 * (z - kCz) / kAz;
        v.baseline = 1000.0 * truth.scale * (1.0 + texture) * (1.0 - 0.1 * std::pow(radius, 6));
        v.rho = 0.1 + 0.4 * (1.0 - radius * radius);
        v.leak = 0.01 * std::pow(radius, 4);
        const double u = (x - kCx) / kAx, w = (y - kCy) / kAy, t = (z - kCz) / kAz;
        const double norm = std::max(1e-9, std::sqrt(u * u + w * w + t * t));
        v.outward = {u / norm, w / norm, t / norm};
        v.region = region_of[static_cast<size_t>(v.index)];
        voxels.push_back(v);
      }
    }
  }
  return voxels;
}

struct RunEvents {
  std::string tsv;
  EventsByCondition events;
};

// Melodies of 8-12 s in shuffled pairs (one familiar, one new), each followed by a press
// 0.3-0.8 s after its end and a gap of 4-9 s; times are whole tenths of a second.
RunEvents DrawEvents(Random& random) {
  RunEvents out;
  for (const char* c : kConditionNames) out.events[c];
  std::vector<std::array<int, 3>> rows;  // onset, duration (tenths), condition
  int t = random.Tenths(4.0, 8.0);
  const int last_start = 10 * (static_cast<int>(kVolumes * kTr) - 28);
  bool known_first = false;
  for (int trial = 0;; ++trial) {
    if (trial % 2 == 0) known_first = random.Uniform() < 0.5;
    const int condition = (trial % 2 == 0) == known_first ? 0 : 1;
    const int duration = random.Tenths(8.0, 12.0);
    if (t + duration > last_start) break;
    const int press = t + duration + random.Tenths(0.3, 0.8);
    rows.push_back({t, duration, condition});
    rows.push_back({press, 0, 2});
    t = press + random.Tenths(4.0, 9.0);
  }
  out.tsv = "onset\tduration\ttrial_type\n";
  for (const auto& [onset, duration, condition] : rows) {
    out.tsv += TenthsText(onset) + "\t" + TenthsText(duration) + "\t" +
               kConditionNames[condition] + "\n";
    out.events[kConditionNames[condition]].push_back({onset / 10.0, duration / 10.0, 1.0});
  }
  return out;
}

struct RunMotion {
  std::vector<std::array<double, 3>> shift;  // mm, rounded to 1e-4 as printed
  std::vector<double> displacement;          // mm; [0] unused (n/a in the file)
  std::string tsv;
};

// Random-walk head position with 0-3 sudden moves of 1.0-1.6 mm (displacement above the
// 0.9 mm censoring threshold); displacement is the Euclidean norm of the volume-to-volume
// change of position.
RunMotion DrawMotion(Random& random) {
  RunMotion m;
  m.shift.resize(kVolumes);
  m.displacement.assign(kVolumes, 0.0);
  std::vector<int> jumps;
  const int n_jumps = random.Index(4);
  while (static_cast<int>(jumps.size()) < n_jumps) {
    const int k = 10 + random.Index(kVolumes - 20);
    if (std::find(jumps.begin(), jumps.end(), k) == jumps.end()) jumps.push_back(k);
  }
  std::array<double, 3> position = {0.0, 0.0, 0.0};
  for (int k = 0; k < kVolumes; ++k) {
    std::array<double, 3> step;
    for (double& d : step) d = (k == 0 ? 0.02 : 0.04) * random.Normal();
    if (std::find(jumps.begin(), jumps.end(), k) != jumps.end()) {
      const double size = random.Uniform(1.0, 1.6);
      const double norm = std::sqrt(step[0] * step[0] + step[1] * step[1] + step[2] * step[2]);
      for (double& d : step) d *= size / std::max(norm, 1e-12);
    }
    for (int a = 0; a < 3; ++a) {
      position[a] += step[a];
      m.shift[k][a] = RoundTo(position[a], 1e4);
    }
  }
  m.tsv = "shift_x\tshift_y\tshift_z\tdisplacement\n";
  for (int k = 0; k < kVolumes; ++k) {
    if (k > 0) {
      double sum = 0.0;
      for (int a = 0; a < 3; ++a) sum += std::pow(m.shift[k][a] - m.shift[k - 1][a], 2);
      m.displacement[k] = RoundTo(std::sqrt(sum), 1e4);
    }
    for (int a = 0; a < 3; ++a) m.tsv += Format("%.4f", m.shift[k][a]) + "\t";
    m.tsv += k == 0 ? "n/a\n" : Format("%.4f", m.displacement[k]) + "\n";
  }
  return m;
}

// Writes one run's four files under `folder`. Signal of a brain voxel, as a fraction of
// its baseline: planted task effects + drift + motion leak + global fluctuation; then
// AR(1) noise is added, volumes with a sudden move dip by 3%, and values are rounded to
// whole numbers. `values` (grid voxels x volumes) must be zero outside the brain; brain
// voxels are overwritten, so one buffer serves every run.
void WriteRun(const fs::path& folder, const std::string& stem, const SubjectTruth& truth,
              const std::vector<Voxel>& voxels, Random& random, std::vector<float>* values) {
  const RunEvents events = DrawEvents(random);
  const RunMotion motion = DrawMotion(random);
  const std::string prefix = (folder / stem).string();
  WriteFileAtomically(prefix + "_events.tsv", events.tsv);
  WriteFileAtomically(prefix + "_confounds.tsv", motion.tsv);

  // The task regressors exactly as the fit builds them, so that a planted beta is what a
  // fit estimates (data units per unit of sustained activation).
  const ModelSpec model = DemoModel();
  RunSpec run;
  run.data_path = prefix + "_bold.nii.gz";
  run.events_path = prefix + "_events.tsv";
  run.confounds_path = prefix + "_confounds.tsv";
  run.events = events.events;
  Diagnostics warnings;
  const DesignMatrix design =
      BuildDesign(model, run, LoadConfounds(model, run), kVolumes, &warnings);
  Eigen::MatrixXd task(kVolumes, kConditions);
  for (int c = 0; c < kConditions; ++c) {
    int column = -1;
    for (int j = 0; j < design.n_columns(); ++j) {
      if (design.columns[j].kind == ColumnKind::kCondition &&
          design.columns[j].name == kConditionNames[c]) column = j;
    }
    if (column < 0) throw Error(std::string("demo: design has no column ") + kConditionNames[c]);
    task.col(c) = design.x.col(column);
  }

  // Shared over the brain: a slow drift, a physiological fluctuation, the motion spikes.
  const double period_s = random.Uniform(250.0, 400.0), phase = random.Uniform(0.0, 2 * kPi);
  const double linear = 0.01 * random.Normal(), wave = 0.004 * random.Normal();
  std::vector<double> global(kVolumes), ramp(kVolumes), slow_wave(kVolumes);
  for (int k = 0; k < kVolumes; ++k) {
    global[k] = (k ? 0.6 * global[k - 1] : 0.0) + 0.002 * 0.8 * random.Normal();
    ramp[k] = k / (kVolumes - 1.0) - 0.5;
    slow_wave[k] = std::sin(2 * kPi * k * kTr / period_s + phase);
  }

  std::vector<std::vector<double>> region_sum(kVolumes, std::vector<double>(kRegionCount));
  std::vector<double> noise(kVolumes);
  for (const Voxel& v : voxels) {
    const double sigma = 0.01 * v.baseline;
    noise[0] = sigma * random.Normal();
    for (int k = 1; k < kVolumes; ++k) {
      noise[k] = v.rho * noise[k - 1] + sigma * std::sqrt(1 - v.rho * v.rho) * random.Normal();
    }
    const double slope = linear + 0.003 * random.Normal(), swing = wave + 0.002 * random.Normal();
    for (int k = 0; k < kVolumes; ++k) {
      double change = global[k] + slope * ramp[k] + swing * slow_wave[k];
      for (int a = 0; a < 3; ++a) change += v.leak * v.outward[a] * motion.shift[k][a];
      if (v.region >= 0) {
        for (int c = 0; c < kConditions; ++c) {
          change += truth.percent[v.region][c] / 100 * task(k, c);
        }
      }
      double value = v.baseline * (1.0 + change) + noise[k];
      if (k > 0 && motion.displacement[k] > 0.9) value *= 0.97;  // spin-history-like dip
      value = std::floor(value + 0.5);  // whole numbers, as scanners store them
      (*values)[static_cast<size_t>(v.index + kGridVoxels * k)] = static_cast<float>(value);
      if (v.region >= 0) region_sum[k][v.region] += value;
    }
  }
  WriteImage(run.data_path, DemoGeometry(kVolumes), *values, kVolumes);

  const std::vector<DemoRegion> regions = DemoRegions();
  std::string table;
  for (int r = 0; r < kRegionCount; ++r) table += std::string(r ? "\t" : "") + regions[r].name;
  table += "\n";
  for (int k = 0; k < kVolumes; ++k) {
    for (int r = 0; r < kRegionCount; ++r) {
      const double mean = region_sum[k][r] / static_cast<double>(regions[r].voxels.size());
      table += (r ? "\t" : "") + Format("%.4f", mean);
    }
    table += "\n";
  }
  WriteFileAtomically(prefix + "_regions.tsv", table);
}

std::string ConfigText(bool roi) {
  std::string text =
      "# The synthetic melody study written by `boldsum demo` (invented data, for trying the\n"
      "# tool only). Volunteers s01..s08, 2 runs each of 180 volumes (TR 2 s), hear familiar\n"
      "# (melody_known) and new (melody_new) melodies of 8-12 s and press a button at each\n"
      "# melody's end (press). Both auditory regions respond more to familiar melodies in 6 of\n"
      "# the 8 volunteers; a motor region responds to the presses. truth.tsv holds the\n"
      "# planted effects.\n";
  text += roi ? "# This file fits the region time series (sXX/run-K_regions.tsv).\n"
              : "# This file fits the images (sXX/run-K_bold.nii.gz) voxel by voxel.\n";
  text +=
      "tr: 2.0\n"
      "slice_reference: 0.5\n"
      "hrf: {shape: double-gamma}\n"
      "drift: {kind: cosine, cutoff_s: 128}\n"
      "autocorrelation: ar1\n"
      "conditions: [melody_known, melody_new, press]\n"
      "confounds: [shift_x, shift_y, shift_z]\n"
      "censor: {column: displacement, above: 0.9}\n"
      "contrasts:\n"
      "  known_vs_new: {melody_known: 1, melody_new: -1}\n"
      "  melodies_vs_rest: {melody_known: 0.5, melody_new: 0.5}\n"
      "  any_melody: [{melody_known: 1}, {melody_new: 1}]\n";
  if (!roi) text += "mask: mask.nii.gz\n";
  text += "subjects:\n";
  for (int s = 0; s < kSubjects; ++s) {
    const std::string id = SubjectId(s);
    text += "  - id: " + id + "\n    runs:\n";
    for (int r = 1; r <= kRuns; ++r) {
      const std::string run = id + "/run-" + std::to_string(r);
      text += "      - {data: " + run + (roi ? "_regions.tsv" : "_bold.nii.gz") +
              ", events: " + run + "_events.tsv, confounds: " + run + "_confounds.tsv}\n";
    }
  }
  text += roi ? "output: results-roi\n" : "output: results\n";
  return text;
}

const char kReadme[] =
    "Synthetic melody study (invented data, for trying boldsum only)\n"
    "\n"
    "Eight volunteers (s01..s08), two runs each of 180 volumes, TR 2 s, listen to familiar\n"
    "(melody_known) and new (melody_new) melodies of 8-12 s and press a button 0.3-0.8 s\n"
    "after each melody ends (press). Images: 40x48x36 voxels of 3 mm, an ellipsoid brain\n"
    "of intensity about 1000 (mask.nii.gz), AR(1) noise (rho 0.1-0.5, 1% of baseline), a\n"
    "global fluctuation (0.2%), slow drift, and head motion (the confounds; a few sudden\n"
    "moves above 0.9 mm, which are censored) leaking into the signal. Regions, spheres of\n"
    "81 voxels around the centre voxel x,y,z: left_auditory 7,22,17; right_auditory\n"
    "32,22,17; motor 13,27,27; control_region 20,8,14. sXX/run-K_regions.tsv holds each\n"
    "region's mean per volume. Both auditory regions respond to melodies, more to familiar\n"
    "ones in 6 of the 8 volunteers; the motor region responds to the presses.\n"
    "\n"
    "truth.tsv: planted effects per subject, region and condition; true_beta in data units\n"
    "per unit of sustained activation (what a fit estimates for the region's mean),\n"
    "true_percent the same in % of the region's baseline, true_known_vs_new the planted\n"
    "melody_known - melody_new difference in data units.\n"
    "\n"
    "Fit the images:          boldsum fit demo.yaml\n"
    "Fit the region tables:   boldsum fit demo_roi.yaml\n"
    "Pool the volunteers:     boldsum pool group.yaml; boldsum pool group_roi.yaml\n"
    "                         (participants.tsv holds invented ages; no age effect is planted)\n"
    "Compare with the truth:  boldsum demo-compare .\n";

std::atomic<int> g_folder_counter{0};

void WriteStudyInto(const fs::path& root, uint64_t seed) {
  Random study_random(seed, 1);
  std::vector<int> order(kSubjects);
  for (int s = 0; s < kSubjects; ++s) order[s] = s;
  for (int i = kSubjects - 1; i > 0; --i) std::swap(order[i], order[study_random.Index(i + 1)]);
  const std::vector<DemoRegion> regions = DemoRegions();

  std::vector<float> values(static_cast<size_t>(kGridVoxels) * kVolumes, 0.0f);
  std::string truth_tsv =
      "subject\tregion\tcondition\ttrue_beta\ttrue_percent\ttrue_known_vs_new\n";
  for (int s = 0; s < kSubjects; ++s) {
    const bool weak = s == order[0] || s == order[1];
    const SubjectTruth truth = DrawSubjectTruth(seed, s, weak);
    const std::vector<Voxel> voxels = BrainVoxels(truth);
    const fs::path folder = root / SubjectId(s);
    fs::create_directory(folder);
    for (int r = 1; r <= kRuns; ++r) {
      Random random(seed, 1000 + 10 * s + r);
      WriteRun(folder, "run-" + std::to_string(r), truth, voxels, random, &values);
    }
    for (int r = 0; r < kRegionCount; ++r) {
      double mean_baseline = 0.0;
      int n = 0;
      for (const Voxel& v : voxels) {
        if (v.region != r) continue;
        mean_baseline += v.baseline;
        ++n;
      }
      mean_baseline /= n;
      const double difference = (truth.percent[r][0] - truth.percent[r][1]) / 100 * mean_baseline;
      for (int c = 0; c < kConditions; ++c) {
        truth_tsv += SubjectId(s) + "\t" + regions[r].name + "\t" + kConditionNames[c] + "\t" +
                     Format("%.4f", truth.percent[r][c] / 100 * mean_baseline) + "\t" +
                     Format("%.3f", truth.percent[r][c]) + "\t" + Format("%.4f", difference) +
                     "\n";
      }
    }
  }

  std::vector<float> mask(static_cast<size_t>(kGridVoxels), 0.0f);
  for (int z = 0; z < kNz; ++z) {
    for (int y = 0; y < kNy; ++y) {
      for (int x = 0; x < kNx; ++x) {
        if (BrainRadius(x, y, z) <= 1.0) mask[static_cast<size_t>(LinearIndex(x, y, z))] = 1.0f;
      }
    }
  }
  WriteImage((root / "mask.nii.gz").string(), DemoGeometry(1), mask, 1);
  WriteFileAtomically((root / "demo.yaml").string(), DemoImageConfigText());
  WriteFileAtomically((root / "demo_roi.yaml").string(), DemoRoiConfigText());
  WriteFileAtomically((root / "participants.tsv").string(), DemoParticipantsText());
  WriteFileAtomically((root / "group.yaml").string(), DemoGroupConfigText(false));
  WriteFileAtomically((root / "group_roi.yaml").string(), DemoGroupConfigText(true));
  WriteFileAtomically((root / "truth.tsv").string(), truth_tsv);
  WriteFileAtomically((root / "README.txt").string(), kReadme);
}

}  // namespace

std::string DemoImageConfigText() { return ConfigText(false); }
std::string DemoRoiConfigText() { return ConfigText(true); }

std::vector<DemoRegion> DemoRegions() {
  std::vector<DemoRegion> regions;
  for (const RegionShape& shape : kRegionShapes) {
    DemoRegion region{shape.name, {}};
    for (int z = 0; z < kNz; ++z) {
      for (int y = 0; y < kNy; ++y) {
        for (int x = 0; x < kNx; ++x) {
          const int dx = x - shape.x, dy = y - shape.y, dz = z - shape.z;
          if (dx * dx + dy * dy + dz * dz <= kRegionRadius * kRegionRadius) {
            region.voxels.push_back(LinearIndex(x, y, z));
          }
        }
      }
    }
    regions.push_back(std::move(region));
  }
  return regions;
}

void WriteDemoStudy(const std::string& dir, uint64_t seed) {
  std::error_code ec;
  fs::path target = fs::absolute(fs::path(dir), ec).lexically_normal();
  if (ec || dir.empty()) throw Error("demo: '" + dir + "' is not a usable folder name");
  if (!target.has_filename()) target = target.parent_path();
  if (fs::exists(target, ec)) {
    if (!fs::is_directory(target, ec)) {
      throw Error(dir +
                  ": exists and is not a folder (the demo study needs a new or empty folder)");
    }
    if (!fs::is_empty(target, ec)) {
      throw Error(dir + ": exists and is not empty (the demo study needs a new or empty folder)");
    }
  }
  fs::create_directories(target.parent_path(), ec);
  if (ec) throw Error(target.parent_path().string() + ": cannot create folder: " + ec.message());
  const fs::path staging =
      target.parent_path() / ("." + target.filename().string() + ".partial-" +
                              std::to_string(getpid()) + "-" + std::to_string(g_folder_counter++));
  if (!fs::create_directory(staging, ec) || ec) {
    throw Error(staging.string() + ": cannot create the staging folder" +
                (ec ? ": " + ec.message() : std::string(" (it exists)")));
  }
  try {
    WriteStudyInto(staging, seed);
    fs::rename(staging, target);
  } catch (const fs::filesystem_error& e) {
    fs::remove_all(staging, ec);
    throw Error(dir + ": cannot write the demo study: " + e.what());
  } catch (...) {
    fs::remove_all(staging, ec);
    throw;
  }
}

}  // namespace boldsum
