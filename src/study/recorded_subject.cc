#include "study/recorded_subject.h"

#include <yaml-cpp/yaml.h>

namespace boldsum {
namespace {

YAML::Node Member(const YAML::Node& node, const char* key, const std::string& path) {
  const YAML::Node value = node[key];
  if (!value) throw Error(SourceLocation{path, 0, 0}, std::string("no \"") + key + "\" member");
  return value;
}

}  // namespace

const RecordedContrast* RecordedSubject::Find(const std::string& name) const {
  for (const RecordedContrast& contrast : contrasts) {
    if (contrast.name == name) return &contrast;
  }
  return nullptr;
}

RecordedSubject ReadRecordedSubject(const std::string& path) {
  YAML::Node root;
  try {
    root = YAML::LoadFile(path);
  } catch (const YAML::Exception& error) {
    throw Error(SourceLocation{path, error.mark.line + 1, error.mark.column + 1},
                "cannot parse the subject summary: " + error.msg);
  }
  RecordedSubject recorded;
  try {
    recorded.id = Member(root, "subject", path).as<std::string>();
    const std::string kind = Member(root, "data_kind", path).as<std::string>();
    if (kind != "image" && kind != "regions") {
      throw Error(SourceLocation{path, 0, 0},
                  "data_kind '" + kind + "' is neither 'image' nor 'regions'");
    }
    recorded.kind = kind == "image" ? DataKind::kImage : DataKind::kRegions;
    for (const YAML::Node& item : Member(root, "contrasts", path)) {
      RecordedContrast contrast;
      contrast.name = Member(item, "name", path).as<std::string>();
      contrast.is_f = Member(item, "type", path).as<std::string>() == "F";
      contrast.estimable = Member(item, "estimable", path).as<bool>();
      const YAML::Node dof = Member(item, "dof", path);
      if (contrast.estimable) {
        if (!dof.IsScalar() || dof.IsNull()) {
          throw Error(SourceLocation{path, 0, 0},
                      "contrast '" + contrast.name + "' is estimable but has no dof");
        }
        contrast.dof_text = dof.Scalar();
      }
      if (item["outputs_key"]) contrast.outputs_key = item["outputs_key"].as<std::string>();
      recorded.contrasts.push_back(contrast);
    }
    for (const YAML::Node& warning : Member(root, "warnings", path)) {
      recorded.warnings.push_back(warning.as<std::string>());
    }
    if (recorded.kind == DataKind::kRegions) {
      for (const YAML::Node& region : Member(root, "regions", path)) {
        recorded.regions.push_back(region.as<std::string>());
      }
    }
  } catch (const YAML::Exception& error) {
    throw Error(SourceLocation{path, error.mark.line + 1, error.mark.column + 1},
                "unexpected content in the subject summary: " + error.msg);
  }
  return recorded;
}

}  // namespace boldsum
