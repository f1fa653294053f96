// Robustness at the command line: inputs found by fault probes that once
// crashed, wrapped, hung or wrote where they should not. Each case is the
// reproduced input and the one-line refusal (exit 2) or the right answer.
#include "cli_call.hpp"
#include "e2e.hpp"
#include "support.hpp"

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include <string>
#include <vector>

using covergrid::test::call;

TEST_CASE("audit --n with a step near INT64_MAX judges the one n in range", "[cli][robustness]") {
  // Was signed overflow; the Release build wrapped to n = 30..0 and printed
  // "refuted at n = 1". The range 30..120 with that step holds only 30.
  const auto huge = call({"audit", "--method", "wilson", "--level", "0.95", "--n",
                          "30:120:9223372036854775807", "--p", "0.1:0.9", "--format", "csv"});
  const auto one = call(
      {"audit", "--method", "wilson", "--level", "0.95", "--n", "30", "--p", "0.1:0.9", "--format", "csv"});
  INFO(huge.err);
  CHECK(huge.status == one.status);
  CHECK(huge.out == one.out);
  const auto too_big = call({"audit", "--method", "wilson", "--level", "0.95", "--n",
                             "30:120:99999999999999999999", "--p", "0.1:0.9"});
  CHECK(too_big.status == 2);
  CHECK(too_big.err.find("--n") != std::string::npos);
}

TEST_CASE("a failed write on standard output is exit 1 naming the reason", "[cli][robustness]") {
  // Was exit 0 with the output lost. /dev/full refuses every write with
  // ENOSPC (Linux, common practice).
  covergrid::test::ScratchDir dir("stdout-full");
  for (const std::string args : {"intervals 3 10 --csv", "methods", "intervals 7 30"}) {
    const std::string script = fmt::format("'{}' {} >/dev/full 2>err.txt", COVERGRID_EXE, args);
    const int status =
        covergrid::test::wait_status(covergrid::test::spawn(dir.path(), {"-c", script}, "/bin/sh"));
    const std::string err = covergrid::test::slurp(dir.path() / "err.txt");
    INFO(args << ": " << err);
    CHECK(status == 1);
    CHECK(err == "covergrid: cannot write standard output: No space left on device\n");
  }
}

TEST_CASE("messages escape Unicode line breaks and cap what they echo", "[cli][robustness]") {
  // U+0085, U+2028 and U+2029 break lines for Unicode-aware readers.
  const auto r = call({"intervals", "3", "10", "--method", "wil\xc2\x85so\xe2\x80\xa8n\xe2\x80\xa9"});
  CHECK(r.status == 2);
  CHECK(r.err.find("wil\\u0085so\\u2028n\\u2029") != std::string::npos);
  CHECK(r.err.find("\xe2\x80\xa8") == std::string::npos);
  CHECK(r.err.find('\n') == r.err.size() - 1);
  // A 90 kB value is echoed in part: the message keeps its start and end.
  const auto long_value = call({"intervals", "3", "10", "--method", std::string(90000, 'w')});
  CHECK(long_value.status == 2);
  CHECK(long_value.err.size() < 700);
  CHECK(long_value.err.find("bytes left out") != std::string::npos);
  CHECK(long_value.err.find('\n') == long_value.err.size() - 1);
}

TEST_CASE("command-line parse errors and an unknown command are one line", "[cli][robustness]") {
  for (const std::vector<std::string>& args : {std::vector<std::string>{"frobnicate"},
                                               {"intervals", "3"},
                                               {"intervals", "3", "10", "--no-such-option"},
                                               {"run", "--threads"}}) {
    const auto r = call(args);
    INFO(args[0] << ": " << r.err);
    CHECK(r.status == 2);
    CHECK(r.err.rfind("covergrid: ", 0) == 0);
    CHECK(r.err.find('\n') == r.err.size() - 1);
    CHECK(r.err.find("see covergrid --help") != std::string::npos);
  }
}
