// The synthetic demo study: invented volunteers listening to familiar and new melodies,
// written as a complete study folder (images, ROI tables, events, confounds, configs and
// the planted truth) so that the tool can be tried and checked without real data.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

namespace boldsum {

// Writes the demo study into `dir` (created, with parents, when missing): for subjects
// s01..s08 and runs 1..2, sXX/run-K_bold.nii.gz (float32, 40x48x36 voxels of 3 mm, 180
// volumes, TR 2 s), sXX/run-K_events.tsv, sXX/run-K_confounds.tsv, sXX/run-K_regions.tsv
// (the mean of each region's voxels per volume); then mask.nii.gz, demo.yaml (images),
// demo_roi.yaml (ROI tables), participants.tsv, group.yaml and group_roi.yaml (the group
// stage), truth.tsv and README.txt. Everything is a deterministic
// function of `seed` (byte-identical files for equal seeds on one platform).
// Throws Error when `dir` exists and is not an empty folder. The study is assembled in a
// temporary sibling folder and renamed into place, so a failure leaves no partial study.
void WriteDemoStudy(const std::string& dir, uint64_t seed = 20261202);

// The texts of demo.yaml and demo_roi.yaml as WriteDemoStudy writes them (independent of
// the seed). configs/demo.yaml and configs/demo_roi.yaml are committed copies.
std::string DemoImageConfigText();
std::string DemoRoiConfigText();

// The demo's participants.tsv (participant_id, age) and its group configs: group.yaml
// pools results/pool-ready (images), group_roi.yaml results-roi/pool-ready/summaries.tsv
// (ROI tables); both estimate the group mean (the planted effect) and an age slope (no
// planted effect) of melodies_vs_rest and known_vs_new. configs/demo_group.yaml and
// configs/demo_group_roi.yaml are committed copies.
std::string DemoParticipantsText();
std::string DemoGroupConfigText(bool roi);

// The demo's regions in ROI-table column order (left_auditory, right_auditory, motor,
// control_region): linear voxel indices i = x + 40*(y + 48*z), increasing, all inside
// the brain mask, disjoint, 50-100 voxels each.
struct DemoRegion {
  std::string name;
  std::vector<int64_t> voxels;
};
std::vector<DemoRegion> DemoRegions();

}  // namespace boldsum
