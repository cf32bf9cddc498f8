#pragma once
// Which scans a batch runs: discovery of sidecars under folders, single sidecars and manifests,
// the scan names (= output folders), shards and per-scan seeds (docs/batch.md).
//
// Inputs (any mix, in any order):
//  - a folder: searched recursively (hidden entries and the batch output folder skipped) for
//    trace sidecars: *.json / *.yaml / *.yml files other than *.truth.json, result.json and
//    summary.json whose top level has the key "streakwright". A .json file that is not valid
//    JSON but mentions "streakwright" is kept too, so a damaged sidecar becomes a failed row
//    instead of silently vanishing. Root = the folder.
//  - a sidecar file (has the "streakwright" key, or is unreadable): root = its folder.
//  - a manifest: NAME.csv, or NAME.json / NAME.yaml / NAME.yml with a "scans" list (and no
//    "streakwright" key). Root = the manifest's folder; scan paths are relative to it.
//    CSV: a header row naming the columns, then one scan per row (RFC 4180 quoting, ',' or ';'
//    separated, '#' comment lines). YAML/JSON: "scans": [ "a.json" | {"scan": "a.json", ...} ].
//    Columns / keys: scan (required), name, gas, ir_wavelength_nm, engine, kind, analysis;
//    an empty cell means "no override".
// Scan name = the sidecar's path relative to its root without the extension, '/' separated
// ("2023/run_12/scan_004"); a path outside its root uses its absolute path without the leading
// '/'. Equal file names in different folders therefore get different names. Two different
// sidecars with the same name are a usage error (reported before any scan runs); the same
// sidecar reached twice is kept once.
//
// Shards: scan s belongs to shard K of N (1-based) when fnv1a64(name) mod N == K - 1: stable
// under re-ordering of the inputs, independent of the other scans.
// Seeds: seed(scan) = splitmix64(base_seed XOR fnv1a64(name)), so a scan's random draws depend
// on its name and the base seed only, never on the order of execution or the number of jobs.

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "cli/analysis.h"

namespace sw::cli {

struct BatchScan {
  std::string sidecar;                   ///< path of the sidecar (as found)
  std::string name;                      ///< scan name = output folder relative to --out
  ScanOverrides overrides;               ///< manifest per-scan overrides
  std::optional<AnalysisKind> analysis;  ///< manifest per-scan analysis
  std::string origin;                    ///< where it came from, for messages
};

/// Collects, de-duplicates and sorts (by name) the scans of `inputs`. `out_dir` is skipped
/// while searching folders. Throws sw::Error(kUsage) for a missing input, a malformed manifest
/// or colliding names. `skipped` (optional) receives one line per ignored candidate file.
std::vector<BatchScan> collect_scans(const std::vector<std::string>& inputs,
                                     const std::string& out_dir,
                                     std::vector<std::string>* skipped = nullptr);

/// 64-bit FNV-1a of the bytes of `s`.
std::uint64_t fnv1a64(const std::string& s);
/// "K/N" with 1 <= K <= N; false otherwise.
bool parse_shard(const std::string& text, int* k, int* n);
/// Whether the scan `name` belongs to shard k of n (1-based).
bool in_shard(const std::string& name, int k, int n);
/// The seed of one scan from the batch's base seed (see above).
unsigned long long scan_seed(unsigned long long base_seed, const std::string& name);

/// Parses manifest CSV text (exposed for tests and messages); `where` names the file; scan
/// paths are resolved against `root`.
std::vector<BatchScan> parse_manifest_csv(const std::string& text, const std::string& where,
                                          const std::string& root);

}  // namespace sw::cli
