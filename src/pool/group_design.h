// The group design matrix from the participants table, and group contrasts over its
// columns.
//
// Columns, in this order: `intercept` (a column of ones) when asked for; each covariate
// under its participants column name (centred on the mean over the subjects of the
// input unless `centre: false`; the mean is not recomputed where a voxel lacks a subject);
// then the factor: with `differences` coding (needs the intercept) one indicator column
// `<factor>_<level>` per level after the first (the reference), so its weight is the
// difference from the reference level; with `cell_means` coding (needs no intercept)
// one indicator column per level, so its weight is that level's mean.
#pragma once

#include <map>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "boldsum/pool.h"

namespace boldsum {

// The design part of the group config, as written, with where each item was written.
struct DesignRequest {
  bool intercept = true;
  SourceLocation where;  // the design key (or the config file when absent)
  struct Covariate {
    std::string column;
    bool centre = true;
    SourceLocation where;
  };
  std::vector<Covariate> covariates;
  std::string factor_column;                // "" for no factor
  std::vector<std::string> factor_levels;   // "" entries never; empty means all, sorted
  FactorCoding coding = FactorCoding::kDifferences;
  SourceLocation factor_where;
  std::string participants_path;            // "" when not given
  SourceLocation participants_where;
};

// Builds the design for `subjects` (input order). Every problem goes to diagnostics:
// a subject absent from the participants table (named), a non-numeric or n/a covariate
// cell, a factor value outside the listed levels, a level without subjects, a coding
// that does not fit the intercept choice, a rank-deficient design, n <= k.
bool BuildGroupDesign(const DesignRequest& request, const std::vector<std::string>& subjects,
                      GroupDesign* design, Diagnostics* diagnostics);

// A group contrast as written: one weight mapping (t) or a list of them (F).
struct ContrastRequest {
  std::string name;
  std::vector<std::map<std::string, double>> rows;
  std::vector<std::map<std::string, SourceLocation>> key_where;  // per row, per key
  bool is_f = false;
  SourceLocation where;
};

// Resolves weights over the design columns. Problems go to diagnostics: an unknown
// column (with the closest name), a row of zeros, linearly dependent F rows.
bool ResolveGroupContrasts(const std::vector<ContrastRequest>& requests,
                           const GroupDesign& design, std::vector<GroupContrast>* contrasts,
                           Diagnostics* diagnostics);

// One t contrast per design column, named after it (the default when none are given).
std::vector<GroupContrast> DefaultGroupContrasts(const GroupDesign& design,
                                                 const SourceLocation& where);

}  // namespace boldsum
