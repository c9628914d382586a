// "Did you mean ...?": the closest of a list of known words to a misspelt one,
// by edit distance (Damerau–Levenshtein, optimal string alignment: insertions,
// deletions, substitutions and swaps of two neighbouring letters each cost 1),
// ignoring case. Used by the procedure parser, the command line, rig files and
// dialect files. Pure functions.
#pragma once

#include <initializer_list>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace kp {

// Edit distance between a and b, ignoring ASCII case.
int EditDistance(std::string_view a, std::string_view b);

// The known word closest to `word`, if it is close enough to be a slip: at
// most 1 edit for words of up to 4 letters, 2 up to 8, 3 beyond. Ties go to
// the earlier word in `known`.
std::optional<std::string> ClosestWord(std::string_view word, std::span<const std::string> known);
std::optional<std::string> ClosestWord(std::string_view word, std::initializer_list<const char*> known);

// ": did you mean 'x'?" or "" when nothing is close.
std::string DidYouMean(std::string_view word, std::span<const std::string> known);
std::string DidYouMean(std::string_view word, std::initializer_list<const char*> known);

}  // namespace kp
