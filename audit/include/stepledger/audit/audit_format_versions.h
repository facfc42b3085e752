#pragma once
// Reading audits of every format_version this tool knows, in one place.
//
// The integrity checks (chain, section digests, seal, signature) run on the document exactly as
// it was recorded: they cover the recorded content, whatever its version. Everything that
// interprets an audit — the replay comparison of `verify --data`, the model rebuilt for
// `predict` and `report --data` — reads it through AuditInCurrentShape, so that an older
// audit is understood with today's names.
//
// What changed between versions (README "Audit file"):
//   format_version 1 -> 2
//     design columns   `TERM[LEVEL]` and `A:TERM[LEVEL]`  ->  `TERM=LEVEL` and `A:TERM=LEVEL`
//                      (every string of the document outside plan, tool and the integrity
//                      fields: design, model, prediction, numerics, steps, cautions, ...)
//     model.ssr        ->  model.ss_regression
//     data.rows_dropped {"missing COLUMN": rows, "zero weight": rows}
//                      ->  [{reason: "missing", column, rows}, {reason: "zero weight",
//                           column: the weights column, rows}] (RowAccounting's order)
//     counts           anova df, model.df_residual and search.n as JSON integers (3, not 3.0)
//   format_version 2 -> 3
//     plan.normalised.seed   20261201 (the old default, recorded where plan.verbatim has no
//                            "seed" key)  ->  1, the default plan.verbatim now gives. The seed
//                            drew nothing before version 3, so no recorded result depends on it;
//                            any other recorded seed stays (an edit is still caught by verify).
//     plan.normalised        gains "holdout": null and "bootstrap": null (version 2 had neither)
//     validation             absent: a version 2 run made no validation
//   format_version 3 -> 4
//     plan.normalised        gains "subset_tolerance": 0 (version 3's all-subsets was exact)
//     search                 gains "subset_nodes" (all-subsets: null, not recorded; else 0),
//                            "subset_tolerance": 0 and "subset_guarantee" (the exact guarantee for
//                            all-subsets, else null)
//     signature              {algorithm: "ed25519", public_key, signed, value} (hex)  ->
//                            {signed, jws, jwk} (a JWS with detached payload, a JWK). Nothing
//                            to translate: the signature is an integrity field, checked as
//                            recorded (CheckAuditSignature reads both shapes, the old one only
//                            in an audit of format_version 3 or earlier); an old signature
//                            cannot be rewritten as a JWS without the private key.
// A change to the format adds its step here and raises kAuditFormatVersion.

#include <nlohmann/json.hpp>

namespace stepledger {

/// The oldest format_version AuditInCurrentShape reads.
inline constexpr int kOldestAuditFormatVersion = 1;

/// A parsed audit (ReadAuditFile) in the shape of the current format_version: an audit of
/// the current version unchanged, an older one translated step by step (the list above), with
/// format_version set to the current one and `read_from_format_version` recording where it
/// came from. The translation breaks the digests and the seal: check integrity on the
/// document as read (CheckAuditIntegrity), never on this. A document without a
/// format_version, or one this tool does not know, is returned unchanged (ReadAuditFile
/// refuses those).
nlohmann::json AuditInCurrentShape(const nlohmann::json& document);

}  // namespace stepledger
