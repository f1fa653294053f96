#include "covergrid/output/verdicts.hpp"

#include "covergrid/output/tables.hpp"

#include <fmt/format.h>

#include <cmath>

namespace covergrid::output {

namespace {

using engine::Claim;
using engine::ClaimKind;
using engine::Outcome;
using engine::Verdict;

const char* about_name(ClaimKind k) { return k == ClaimKind::minimum ? "minimum" : "mean"; }

/// Which tail the misses fall on at the worst case.
std::string tail_text(const Verdict& v) {
  const double lo = v.worst_miss_low, hi = v.worst_miss_high;
  if (lo + hi <= 0) return "none";
  if (lo >= 2 * hi) return "low";   // intervals wholly below p
  if (hi >= 2 * lo) return "high";  // intervals wholly above p
  return "both";
}

/// The same, in words for the text table.
std::string tail_words(const Verdict& v) {
  const std::string t = tail_text(v);
  if (t == "none") return "no misses";
  if (t == "low") return "mostly intervals too low";
  if (t == "high") return "mostly intervals too high";
  return "on both sides";
}

std::string approach_text(int from) { return from < 0 ? "from below" : from > 0 ? "from above" : "attained"; }

std::string json_string(const std::string& s) {
  std::string out = "\"";
  for (char ch : s) {
    switch (ch) {
      case '"':
        out += "\\\"";
        break;
      case '\\':
        out += "\\\\";
        break;
      case '\n':
        out += "\\n";
        break;
      case '\t':
        out += "\\t";
        break;
      default:
        if (static_cast<unsigned char>(ch) < 0x20)
          out += fmt::format("\\u{:04x}", static_cast<unsigned>(ch));
        else
          out += ch;
    }
  }
  return out + "\"";
}

std::string json_number(double v) { return std::isfinite(v) ? fmt::format("{}", v) : "null"; }

std::string csv_field(const std::string& s) {
  if (s.find_first_of(",\"\n") == std::string::npos) return s;
  std::string out = "\"";
  for (char ch : s) out += ch == '"' ? std::string("\"\"") : std::string(1, ch);
  return out + "\"";
}

std::string p_range_text(const Claim& c) {
  return c.p_lo == c.p_hi ? fmt::format("{:g}", c.p_lo) : fmt::format("[{:g}, {:g}]", c.p_lo, c.p_hi);
}

std::string text_block(const Claim& c, const Verdict& v) {
  std::string s;
  s += fmt::format("{}: {}\n", c.name, engine::outcome_name(v.outcome));
  s += fmt::format("  claim     {} coverage of {} at {:g} % ({}) >= {:.6g} for n in {}, p in {}\n",
                   about_name(c.kind), c.method.label, 100 * c.level, methods::side_name(c.side), v.threshold,
                   n_set_text(c.n), p_range_text(c));
  s += fmt::format("  model     {}\n", c.model->label());
  if (v.simulated)
    s += fmt::format("  source    Monte Carlo, {} replicates per cell at {} p points ({} cells), seed {}\n",
                     v.replicates, v.cells / std::max<std::size_t>(1, c.n.size()), v.cells, c.seed);
  else
    s += fmt::format("  source    exact ({})\n",
                     c.model->lattice() > 0
                         ? (c.kind == ClaimKind::minimum ? "minimum over the attainable p (K/N) in the range"
                                                         : "mean over the attainable p (K/N) in the range")
                     : c.kind == ClaimKind::minimum
                         ? "continuous infimum over the p range"
                         : "mean over p uniform on the range, by incomplete beta integrals");
  if (c.kind == ClaimKind::minimum) {
    s += fmt::format("  worst     n = {}, p = {:.10g}{}: coverage {:.8f}\n", v.worst_n, v.worst_p,
                     v.simulated ? "" : " (" + approach_text(v.worst_from) + ")", v.worst_coverage);
  } else {
    s += fmt::format("  worst     n = {}: mean coverage {:.8f}\n", v.worst_n, v.worst_coverage);
  }
  s += fmt::format("  misses    {:.6f} below p (interval too low), {:.6f} above p (interval too high): {}\n",
                   v.worst_miss_low, v.worst_miss_high, tail_words(v));
  s += fmt::format("  region    {} of {} n below {:.6g}; {:.4f} % of the (n, p) region below it{}\n",
                   v.n_below, v.n_count, v.threshold, 100 * v.share_below,
                   v.simulated ? (c.kind == ClaimKind::minimum ? " (cells whose upper bound is below)"
                                                               : " (cells whose estimate is below)")
                   : v.share_approximate ? " (partly sampled)"
                                         : "");
  if (v.simulated) {
    s += fmt::format("  bound     [{:.6f}, {:.6f}] at the deciding {}; {}\n", v.lower_bound, v.upper_bound,
                     c.kind == ClaimKind::minimum ? "cell" : "n", v.correction);
    if (v.outcome == Outcome::inconclusive) {
      if (v.replicates_to_decide > 0)
        s += fmt::format("  decide    about {} replicates per cell would decide it (normal approximation)\n",
                         v.replicates_to_decide);
      else
        s += "  decide    an estimate sits on the threshold: more replicates would not settle it\n";
      if (v.exact_decided) {
        const std::string where =
            c.kind == ClaimKind::minimum
                ? fmt::format("n = {}, p = {:.10g}, coverage {:.8f}", v.exact_worst_n, v.exact_worst_p,
                              v.exact_worst_coverage)
                : fmt::format("n = {}, mean coverage {:.8f}", v.exact_worst_n, v.exact_worst_coverage);
        s += fmt::format(
            "  exact     exact enumeration decides this claim at once: {} (worst {}{})\n"
            "            no more replicates are needed: audit it exactly (without --replicates, or without "
            "`replicates` in a claims file)\n",
            engine::outcome_name(v.exact_outcome), where,
            c.kind == ClaimKind::minimum && c.p_lo < c.p_hi ? "; over the continuous p range" : "");
      }
    }
  }
  if (v.refined) s += "  note      a non-contiguous covered set was searched densely somewhere\n";
  return s;
}

}  // namespace

std::string n_set_text(const std::vector<int>& n) {
  if (n.empty()) return "";
  if (n.size() == 1) return std::to_string(n[0]);
  if (n.back() - n.front() + 1 == static_cast<int>(n.size()))
    return fmt::format("{}..{}", n.front(), n.back());
  if (n.size() <= 6) {
    std::string s;
    for (int v : n) s += (s.empty() ? "" : ", ") + std::to_string(v);
    return s;
  }
  return fmt::format("{}..{} ({} values)", n.front(), n.back(), n.size());
}

std::string verdict_table(const std::vector<Claim>& claims, const std::vector<Verdict>& verdicts,
                          VerdictFormat format) {
  std::string out;
  if (format == VerdictFormat::text) {
    for (std::size_t i = 0; i < claims.size(); ++i) out += text_block(claims[i], verdicts[i]) + "\n";
    if (claims.size() > 1) {
      std::size_t width = 5;
      for (const auto& c : claims) width = std::max(width, c.name.size());
      out += fmt::format("{:<{}}  {:<12}  {:>8}  {:>12}  {:>6}\n", "claim", width, "verdict", "n worst",
                         "coverage", "tail");
      for (std::size_t i = 0; i < claims.size(); ++i)
        out += fmt::format("{:<{}}  {:<12}  {:>8}  {:>12.8f}  {:>6}\n", claims[i].name, width,
                           engine::outcome_name(verdicts[i].outcome), verdicts[i].worst_n,
                           verdicts[i].worst_coverage, tail_text(verdicts[i]));
      out += "\n";
    }
    out += wrap_text(coverage_caution, 100);
    return out;
  }
  if (format == VerdictFormat::csv) {
    out +=
        "claim,verdict,method,level,side,about,n_from,n_to,n_count,p_lo,p_hi,tolerance,threshold,source,"
        "worst_n,worst_p,worst_from,worst_coverage,worst_miss_low,worst_miss_high,tail,n_below,share_below,"
        "replicates,cells,lower_bound,upper_bound,replicates_to_decide,exact_verdict,model\n";
    for (std::size_t i = 0; i < claims.size(); ++i) {
      const Claim& c = claims[i];
      const Verdict& v = verdicts[i];
      auto num = [](double x) { return csv_number(x); };
      out += fmt::format(
          "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}\n",
          csv_field(c.name), engine::outcome_name(v.outcome), csv_field(c.method.label), num(c.level),
          methods::side_name(c.side), about_name(c.kind), c.n.front(), c.n.back(), c.n.size(), num(c.p_lo),
          num(c.p_hi), num(c.tolerance), num(v.threshold), v.simulated ? "monte-carlo" : "exact", v.worst_n,
          num(v.worst_p),
          v.simulated || c.kind == ClaimKind::mean ? std::string() : std::to_string(v.worst_from),
          num(v.worst_coverage), num(v.worst_miss_low), num(v.worst_miss_high), tail_text(v), v.n_below,
          num(v.share_below), v.replicates, v.cells, v.simulated ? num(v.lower_bound) : "",
          v.simulated ? num(v.upper_bound) : "", v.replicates_to_decide,
          v.exact_decided ? engine::outcome_name(v.exact_outcome) : "", csv_field(c.model->label()));
    }
    return out;
  }
  out += "{\n  \"claims\": [\n";
  for (std::size_t i = 0; i < claims.size(); ++i) {
    const Claim& c = claims[i];
    const Verdict& v = verdicts[i];
    std::string ns;
    for (int n : c.n) ns += (ns.empty() ? "" : ", ") + std::to_string(n);
    out += "    {\n";
    out += fmt::format("      \"name\": {},\n      \"verdict\": \"{}\",\n", json_string(c.name),
                       engine::outcome_name(v.outcome));
    out += fmt::format(
        "      \"method\": {},\n      \"level\": {},\n      \"side\": \"{}\",\n      \"about\": \"{}\",\n",
        json_string(c.method.label), json_number(c.level), methods::side_name(c.side), about_name(c.kind));
    out += fmt::format("      \"model\": {},\n", json_string(c.model->label()));
    out += fmt::format(
        "      \"n\": [{}],\n      \"p\": [{}, {}],\n      \"tolerance\": {},\n      \"threshold\": {},\n",
        ns, json_number(c.p_lo), json_number(c.p_hi), json_number(c.tolerance), json_number(v.threshold));
    out += fmt::format("      \"source\": \"{}\",\n", v.simulated ? "monte-carlo" : "exact");
    out += fmt::format(
        "      \"worst\": {{\"n\": {}, \"p\": {}, \"from\": {}, \"coverage\": {}, \"miss_low\": {}, "
        "\"miss_high\": {}, \"tail\": \"{}\"}},\n",
        v.worst_n, json_number(v.worst_p),
        v.simulated || c.kind == ClaimKind::mean ? "null" : std::to_string(v.worst_from),
        json_number(v.worst_coverage), json_number(v.worst_miss_low), json_number(v.worst_miss_high),
        tail_text(v));
    out += fmt::format("      \"n_below\": {},\n      \"n_count\": {},\n      \"share_below\": {},\n",
                       v.n_below, v.n_count, json_number(v.share_below));
    if (v.simulated)
      out += fmt::format(
          "      \"monte_carlo\": {{\"replicates\": {}, \"cells\": {}, \"seed\": {}, \"lower_bound\": {}, "
          "\"upper_bound\": {}, \"correction\": {}, \"replicates_to_decide\": {}, \"exact_verdict\": {}}},\n",
          v.replicates, v.cells, c.seed, json_number(v.lower_bound), json_number(v.upper_bound),
          json_string(v.correction), v.replicates_to_decide,
          v.exact_decided ? fmt::format("\"{}\"", engine::outcome_name(v.exact_outcome)) : "null");
    out += fmt::format("      \"refined\": {}\n    }}{}\n", v.refined ? "true" : "false",
                       i + 1 < claims.size() ? "," : "");
  }
  out += fmt::format("  ],\n  \"caution\": {}\n}}\n", json_string(coverage_caution));
  return out;
}

}  // namespace covergrid::output
