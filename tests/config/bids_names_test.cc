// The pieces under subjects_from: BIDS file names, label order, confounds patterns and
// the JSON sidecar reader.
#include "config/bids_names.h"

#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "boldsum/io.h"
#include "config/bids_discovery.h"
#include "config/json_members.h"

namespace boldsum::config {
namespace {

using Entities = std::vector<std::pair<std::string, std::string>>;

TEST(BidsNames, ParsesEntitiesSuffixAndExtension) {
  const auto name = ParseBidsName("sub-01_ses-2_task-melodies_run-10_space-MNI_bold.nii.gz");
  ASSERT_TRUE(name.has_value());
  EXPECT_EQ(
      name->entities,
      (Entities{
          {"sub", "01"}, {"ses", "2"}, {"task", "melodies"}, {"run", "10"}, {"space", "MNI"}}));
  EXPECT_EQ(name->suffix, "bold");
  EXPECT_EQ(name->extension, ".nii.gz");
  EXPECT_EQ(name->Get("run"), "10");
  EXPECT_EQ(name->Get("acq"), "");
  EXPECT_EQ(name->Stem(DerivativeEntities()), "sub-01_ses-2_task-melodies_run-10");
  const auto top = ParseBidsName("task-melodies_bold.json");
  ASSERT_TRUE(top.has_value());
  EXPECT_EQ(top->entities, (Entities{{"task", "melodies"}}));
  EXPECT_EQ(top->extension, ".json");
  EXPECT_TRUE(ParseBidsName("events.tsv").has_value());
}

TEST(BidsNames, RejectsWhatIsNotABidsName) {
  for (const char* bad :
       {"sub-01_task-a b_bold.nii", "sub-01__bold.nii", "sub_bold.nii", "sub-01_sub-02_bold.nii",
        "Sub-01_bold.nii", "sub-01-2_bold.nii", "sub-_bold.nii", "-01_bold.nii",
        "sub-01_task-x_.nii", "sub-01_bo-ld", ""}) {
    EXPECT_FALSE(ParseBidsName(bad).has_value()) << bad;
  }
}

TEST(BidsNames, InheritanceNeedsEveryEntity) {
  const BidsName data = *ParseBidsName("sub-01_ses-1_task-melodies_run-1_bold.nii.gz");
  EXPECT_TRUE(AppliesTo(*ParseBidsName("task-melodies_bold.json"), data));
  EXPECT_TRUE(AppliesTo(*ParseBidsName("sub-01_run-1_bold.json"), data));
  EXPECT_FALSE(AppliesTo(*ParseBidsName("task-rest_bold.json"), data));
  EXPECT_FALSE(AppliesTo(*ParseBidsName("sub-01_acq-fast_bold.json"), data));
}

TEST(BidsNames, NaturalOrderOfLabels) {
  const std::vector<std::string> ordered = {"01", "1", "02", "2", "10", "A", "a", "a2", "ab"};
  for (std::size_t i = 0; i < ordered.size(); ++i) {
    for (std::size_t j = 0; j < ordered.size(); ++j) {
      EXPECT_EQ(NaturalLess(ordered[i], ordered[j]), i < j) << ordered[i] << " " << ordered[j];
    }
  }
}

TEST(BidsNames, ConfoundsPatterns) {
  const BidsName bold =
      *ParseBidsName("sub-01_ses-02_task-melodies_run-1_space-MNI_res-2_desc-preproc_bold.nii");
  EXPECT_EQ(ExpandConfoundsPattern("{stem}_desc-confounds_timeseries.tsv", bold),
            "sub-01_ses-02_task-melodies_run-1_desc-confounds_timeseries.tsv");
  EXPECT_EQ(ExpandConfoundsPattern("../../{subject}/{session}/x_{stem}.tsv", bold),
            "../../sub-01/ses-02/x_sub-01_ses-02_task-melodies_run-1.tsv");
  EXPECT_EQ(ExpandConfoundsPattern("{session}{stem}", *ParseBidsName("sub-1_task-x_bold.nii")),
            "sub-1_task-x");
  EXPECT_EQ(UnknownPlaceholder("{stem}_{subject}_{session}.tsv"), "");
  EXPECT_EQ(UnknownPlaceholder("{stem}_{Stem}.tsv"), "{Stem}");
  EXPECT_EQ(UnknownPlaceholder("{stem}_{.tsv"), "{");
  EXPECT_EQ(UnknownPlaceholder("plain.tsv"), "");
}

// Labels: 1-6 letters or digits, leaning on digits so that numeric comparisons happen.
rc::Gen<std::string> GenLabel() {
  return rc::gen::container<std::string>(
      *rc::gen::inRange<std::size_t>(1, 7),
      rc::gen::oneOf(rc::gen::inRange('0', static_cast<char>('9' + 1)),
                     rc::gen::element('a', 'b', 'Z')));
}

RC_GTEST_PROP(BidsNamesProperties, NamesRoundTrip, ()) {
  const std::vector<std::string> keys = {"sub", "ses", "task", "acq", "run", "space", "desc"};
  Entities entities;
  for (const std::string& key : keys) {
    if (*rc::gen::arbitrary<bool>()) entities.emplace_back(key, *GenLabel());
  }
  const std::string suffix = *rc::gen::element<std::string>("bold", "events", "T1w");
  const std::string extension = *rc::gen::element<std::string>(".nii.gz", ".json", "");
  std::string file;
  for (const auto& [key, label] : entities) file += key + "-" + label + "_";
  file += suffix + extension;
  const auto name = ParseBidsName(file);
  RC_ASSERT(name.has_value());
  RC_ASSERT(name->entities == entities);
  RC_ASSERT(name->suffix == suffix);
  RC_ASSERT(name->extension == extension);
  // A name applies to itself and every name applies to one with more entities.
  RC_ASSERT(AppliesTo(*name, *name));
  BidsName fewer = *name;
  if (!fewer.entities.empty()) fewer.entities.erase(fewer.entities.begin());
  RC_ASSERT(AppliesTo(fewer, *name));
}

RC_GTEST_PROP(BidsNamesProperties, NaturalLessIsAStrictOrder, ()) {
  const std::string a = *GenLabel();
  const std::string b = *GenLabel();
  const std::string c = *GenLabel();
  RC_ASSERT(!NaturalLess(a, a));
  RC_ASSERT(int{NaturalLess(a, b)} + int{NaturalLess(b, a)} + int{a == b} == 1);
  if (NaturalLess(a, b) && NaturalLess(b, c)) RC_ASSERT(NaturalLess(a, c));
}

class JsonFile {
 public:
  explicit JsonFile(const std::string& text) {
    const ::testing::TestInfo* test = ::testing::UnitTest::GetInstance()->current_test_info();
    path_ = ::testing::TempDir() + "boldsum_json_" + test->name() + ".json";
    std::ofstream(path_, std::ios::binary) << text;
  }
  ~JsonFile() { std::filesystem::remove(path_); }
  const std::string& path() const { return path_; }

 private:
  std::string path_;
};

std::string ErrorOf(const std::string& text) {
  const JsonFile file(text);
  try {
    ReadJsonMembers(file.path());
  } catch (const Error& error) {
    const SourceLocation& where = error.where();
    return std::to_string(where.line) + ":" + std::to_string(where.column) + " " +
           std::string(error.what()).substr(where.ToString().size() + 2);
  }
  return "no error";
}

TEST(JsonMembers, TopMembersWithPositionsAndValues) {
  const JsonFile file(
      "\xEF\xBB\xBF{\n"
      "  \"RepetitionTime\": -0.5e1,\n"
      "  \"Task\\u00e9\\ud83c\\udfb5\\n\": {\"a\": [1, true, null, \"}\"]},\n"
      "\t\"SliceTiming\": [0.0, 1.5E-1]\r\n"
      "}\n");
  const std::vector<JsonMember> members = ReadJsonMembers(file.path());
  ASSERT_EQ(members.size(), 3u);
  EXPECT_EQ(members[0].name, "RepetitionTime");
  EXPECT_TRUE(members[0].is_number);
  EXPECT_EQ(members[0].number, -5.0);
  EXPECT_EQ(members[0].where.line, 2);
  EXPECT_EQ(members[0].where.column, 21);
  // U+00E9 and U+1F3B5 (a surrogate pair) in UTF-8, then a newline.
  EXPECT_EQ(members[1].name, "Task\xC3\xA9\xF0\x9F\x8E\xB5\n");
  EXPECT_FALSE(members[1].is_number);
  EXPECT_EQ(members[1].text, "{\"a\": [1, true, null, \"}\"]}");
  EXPECT_EQ(members[2].text, "[0.0, 1.5E-1]");
  EXPECT_EQ(members[2].where.line, 4);
  EXPECT_EQ(members[2].where.column, 17);
  EXPECT_TRUE(ReadJsonMembers(JsonFile(" {} ").path()).empty());
}

TEST(JsonMembers, InvalidJsonIsLocated) {
  EXPECT_EQ(ErrorOf("[1]"), "1:1 invalid JSON: expected a JSON object ('{') at the top, found '['");
  EXPECT_EQ(ErrorOf("{\"a\": 01}"), "1:7 invalid JSON: malformed number, found '0'");
  EXPECT_EQ(ErrorOf("{\"a\": 1.}"), "1:9 invalid JSON: expected digits after '.', found '}'");
  EXPECT_EQ(ErrorOf("{\"a\": 1} x"),
            "1:10 invalid JSON: unexpected text after the JSON object, "
            "found 'x'");
  EXPECT_EQ(ErrorOf("{\"a\": \"b\n\"}"),
            "1:9 invalid JSON: control character inside a string, "
            "found U+000A");
  EXPECT_EQ(ErrorOf("{\"a\": [1,\n 2\n"), "3:1 invalid JSON: expected ',' or ']', found the end");
  EXPECT_EQ(ErrorOf("{'a': 1}"),
            "1:2 invalid JSON: expected a member name in double quotes, "
            "found '''");
  EXPECT_EQ(ErrorOf("{\"a\": tru}"), "1:7 invalid JSON: expected a JSON value, found 't'");
  EXPECT_EQ(ErrorOf("{\"a\": \"\\x\"}"), "1:9 invalid JSON: unknown escape in a string, found 'x'");
  EXPECT_EQ(ErrorOf(""),
            "1:1 invalid JSON: expected a JSON object ('{') at the top, found the end");
  EXPECT_EQ(ErrorOf(std::string(600, '[')).substr(0, 4), "1:1 ");
  EXPECT_EQ(ErrorOf("{\"a\": " + std::string(600, '[')),
            "1:519 invalid JSON: nesting deeper than 512, found '['");
}

// Numbers written the way io writes JSON (shortest round-trip form) read back exactly.
RC_GTEST_PROP(JsonMembersProperties, NumbersRoundTrip, ()) {
  const double mantissa = *rc::gen::inRange(-1000000, 1000000) / 1000.0;
  const int exponent = *rc::gen::inRange(-300, 300);
  const double value = mantissa * std::pow(10.0, exponent);
  const std::string text = JsonNumber(value);
  const JsonFile file("{\"RepetitionTime\": " + text + "}");
  const std::vector<JsonMember> members = ReadJsonMembers(file.path());
  RC_ASSERT(members.size() == 1u);
  RC_ASSERT(members[0].is_number);
  RC_ASSERT(members[0].number == value);
}

}  // namespace
}  // namespace boldsum::config
