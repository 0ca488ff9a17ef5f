// The pool-ready hand-off (README "Pool-ready stacks"); GatherStudy is declared in
// boldsum/study.h.
#pragma once

#include "study/recorded_subject.h"

namespace boldsum {

// OUT/<kPoolReadyFolder>/ holds the stacks; config validation reserves it as a subject id.
inline constexpr const char* kPoolReadyFolder = "pool-ready";

}  // namespace boldsum
