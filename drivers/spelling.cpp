#include "drivers/spelling.h"

#include <algorithm>
#include <cctype>

#include <fmt/format.h>

namespace kp {

int EditDistance(std::string_view a, std::string_view b) {
  auto lower = [](char c) { return static_cast<char>(std::tolower(static_cast<unsigned char>(c))); };
  const size_t n = a.size(), m = b.size();
  std::vector<std::vector<int>> d(n + 1, std::vector<int>(m + 1, 0));
  for (size_t i = 0; i <= n; ++i) d[i][0] = static_cast<int>(i);
  for (size_t j = 0; j <= m; ++j) d[0][j] = static_cast<int>(j);
  for (size_t i = 1; i <= n; ++i) {
    for (size_t j = 1; j <= m; ++j) {
      int cost = lower(a[i - 1]) == lower(b[j - 1]) ? 0 : 1;
      d[i][j] = std::min({d[i - 1][j] + 1, d[i][j - 1] + 1, d[i - 1][j - 1] + cost});
      if (i > 1 && j > 1 && lower(a[i - 1]) == lower(b[j - 2]) && lower(a[i - 2]) == lower(b[j - 1]))
        d[i][j] = std::min(d[i][j], d[i - 2][j - 2] + 1);
    }
  }
  return d[n][m];
}

std::optional<std::string> ClosestWord(std::string_view word, std::span<const std::string> known) {
  if (word.empty() || word.size() > 64) return std::nullopt;
  const int allowed = word.size() <= 4 ? 1 : word.size() <= 8 ? 2 : 3;
  const std::string* best = nullptr;
  int best_d = allowed + 1;
  for (const std::string& k : known) {
    int dist = EditDistance(word, k);
    if (dist < best_d) best_d = dist, best = &k;
  }
  if (best == nullptr) return std::nullopt;
  return *best;
}

std::optional<std::string> ClosestWord(std::string_view word, std::initializer_list<const char*> known) {
  std::vector<std::string> words(known.begin(), known.end());
  return ClosestWord(word, words);
}

std::string DidYouMean(std::string_view word, std::span<const std::string> known) {
  std::optional<std::string> w = ClosestWord(word, known);
  return w ? fmt::format(": did you mean '{}'?", *w) : std::string();
}

std::string DidYouMean(std::string_view word, std::initializer_list<const char*> known) {
  std::vector<std::string> words(known.begin(), known.end());
  return DidYouMean(word, words);
}

}  // namespace kp
