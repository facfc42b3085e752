#pragma once
// Private: the magnitude check of BuildDesign (design.h, kLargestMagnitude and
// kSmallestMagnitude). Nothing outside engine/src includes this file.

#include "stepledger/engine/design.h"
#include "stepledger/engine/profile.h"

namespace stepledger::design_detail {

/// Throws when the response (untransformed), the weights or a design column of a numeric,
/// power or product term has a largest magnitude outside [kSmallestMagnitude,
/// kLargestMagnitude] (0 is accepted). Order: response, weights, then the terms in evaluation
/// order (a product after its parts), so that a product is blamed only when its parts pass.
/// A column, the response or the weights: InputError at the cell of the largest magnitude
/// ("file:line:column: ..."), or naming the file alone when the profile has no locations. A
/// power: the same cell, saying what the power makes of it. A product: PlanError at the term's
/// key, naming its parts' largest magnitudes and their cells. Log terms and a logged response
/// never leave the window (|ln x| <= 745 for every positive double, and is 0 or >= 1e-16).
void CheckMagnitudes(const Design& design, const DataProfile& profile);

}  // namespace stepledger::design_detail
