#include "config/bids_names.h"

#include <algorithm>
#include <cctype>

namespace boldsum::config {
namespace {

bool IsAlnum(char c) { return std::isalnum(static_cast<unsigned char>(c)) != 0; }

bool IsDigits(const std::string& text) {
  return !text.empty() && std::all_of(text.begin(), text.end(), [](char c) {
    return std::isdigit(static_cast<unsigned char>(c)) != 0;
  });
}

std::string WithoutLeadingZeros(const std::string& digits) {
  const std::size_t first = digits.find_first_not_of('0');
  return first == std::string::npos ? "0" : digits.substr(first);
}

}  // namespace

std::string BidsName::Get(const std::string& key) const {
  for (const auto& [k, label] : entities) {
    if (k == key) return label;
  }
  return "";
}

std::string BidsName::Stem(const std::vector<std::string>& drop) const {
  std::string stem;
  for (const auto& [key, label] : entities) {
    if (std::find(drop.begin(), drop.end(), key) != drop.end()) continue;
    stem += (stem.empty() ? "" : "_") + key + "-" + label;
  }
  return stem;
}

const std::vector<std::string>& DerivativeEntities() {
  static const std::vector<std::string> keys = {"space", "res", "den", "desc"};
  return keys;
}

std::optional<BidsName> ParseBidsName(const std::string& file_name) {
  const std::size_t dot = file_name.find('.');
  const std::string base = file_name.substr(0, dot);
  BidsName name;
  name.extension = dot == std::string::npos ? "" : file_name.substr(dot);
  std::size_t start = 0;
  while (true) {
    const std::size_t end = base.find('_', start);
    const std::string part = base.substr(start, end == std::string::npos ? end : end - start);
    if (end == std::string::npos) {
      if (!IsBidsLabel(part)) return std::nullopt;
      name.suffix = part;
      return name;
    }
    const std::size_t dash = part.find('-');
    if (dash == std::string::npos || dash == 0) return std::nullopt;
    const std::string key = part.substr(0, dash);
    const std::string label = part.substr(dash + 1);
    const bool key_ok = std::all_of(key.begin(), key.end(), [](char c) {
      return (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9');
    });
    if (!key_ok || !IsBidsLabel(label) || !name.Get(key).empty()) return std::nullopt;
    name.entities.emplace_back(key, label);
    start = end + 1;
  }
}

bool AppliesTo(const BidsName& general, const BidsName& specific) {
  return std::all_of(general.entities.begin(), general.entities.end(), [&](const auto& entity) {
    return specific.Get(entity.first) == entity.second;
  });
}

bool IsBidsLabel(const std::string& text) {
  return !text.empty() && std::all_of(text.begin(), text.end(), IsAlnum);
}

bool NaturalLess(const std::string& a, const std::string& b) {
  const bool a_number = IsDigits(a);
  const bool b_number = IsDigits(b);
  if (a_number && b_number) {
    const std::string x = WithoutLeadingZeros(a);
    const std::string y = WithoutLeadingZeros(b);
    if (x.size() != y.size()) return x.size() < y.size();
    if (x != y) return x < y;
    return a < b;
  }
  if (a_number != b_number) return a_number;
  return a < b;
}

}  // namespace boldsum::config
