// kindling/audit/result.hpp: what an audit returns. An audit_report is a list of
// findings, one per check that ran; it converts to true when every check passed, and
// explain() gives one sentence per failure (or a one-line summary when all passed),
// so a failing unit test prints what is wrong in plain words.
#ifndef KINDLING_AUDIT_RESULT_HPP
#define KINDLING_AUDIT_RESULT_HPP

#include <cmath>
#include <cstdio>
#include <ostream>
#include <string>
#include <utility>
#include <vector>

namespace kindling {

/// One check: its short name ("ks", "mean", "duplicate-units", ...), whether it
/// passed, a sentence that says what was found, and (for statistical checks) the
/// statistic, its p-value and the interval the check accepted (for "ks" [0, critical D],
/// for "mean" the interval of the mean, for "variance" that of the standard deviation);
/// NaN when the check is not statistical.
struct audit_finding {
  std::string check;
  bool passed = true;
  std::string sentence;
  double statistic = std::nan("");
  double p_value = std::nan("");
  double lower = std::nan("");
  double upper = std::nan("");
};

class audit_report {
 public:
  audit_report() = default;
  /// What was audited, e.g. "He normal with fan-in 2048"; begins explain()'s summary.
  explicit audit_report(std::string subject) : subject_(std::move(subject)) {}

  void add(audit_finding f) { findings_.push_back(std::move(f)); }

  bool passed() const noexcept {
    for (const audit_finding& f : findings_) {
      if (!f.passed) return false;
    }
    return true;
  }
  explicit operator bool() const noexcept { return passed(); }

  const std::vector<audit_finding>& findings() const noexcept { return findings_; }
  const std::string& subject() const noexcept { return subject_; }
  /// The finding of a check by name, or nullptr.
  const audit_finding* find(const std::string& check) const noexcept {
    for (const audit_finding& f : findings_) {
      if (f.check == check) return &f;
    }
    return nullptr;
  }
  std::vector<audit_finding> failures() const {
    std::vector<audit_finding> out;
    for (const audit_finding& f : findings_) {
      if (!f.passed) out.push_back(f);
    }
    return out;
  }

  /// One sentence per failed check, each on its own line; when all passed, a single
  /// line naming the subject and the checks that ran.
  std::string explain() const {
    std::string text;
    if (passed()) {
      text = (subject_.empty() ? std::string("audit") : subject_) + ": all " +
             std::to_string(findings_.size()) + " checks passed (";
      for (std::size_t i = 0; i < findings_.size(); ++i) {
        if (i != 0) text += ", ";
        text += findings_[i].check;
      }
      return text + ")";
    }
    for (const audit_finding& f : findings_) {
      if (f.passed) continue;
      if (!text.empty()) text += "\n";
      text += f.sentence;
    }
    return text;
  }

 private:
  std::string subject_;
  std::vector<audit_finding> findings_;
};

inline std::ostream& operator<<(std::ostream& os, const audit_report& r) { return os << r.explain(); }

namespace detail {

// Numbers in sentences: 3 significant digits, like a person would write them.
inline std::string short_number(double x, int digits = 3) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, x);
  return buffer;
}

}  // namespace detail

}  // namespace kindling

#endif  // KINDLING_AUDIT_RESULT_HPP
