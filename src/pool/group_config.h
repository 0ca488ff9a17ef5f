// The keys the group config loader accepts, for the test that keeps
// configs/group_reference.yaml in step with the loader.
#pragma once

#include <string>
#include <vector>

namespace boldsum {

// Every accepted key as a dotted path ("design.factor.coding"), in loader order.
std::vector<std::string> GroupConfigKeyPaths();

}  // namespace boldsum
