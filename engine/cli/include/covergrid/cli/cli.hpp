#pragma once
/// The command-line front end as a library call, so that tests reach every
/// command without a subprocess. main() only forwards to run_cli().
#include <cstddef>
#include <iosfwd>
#include <streambuf>
#include <string>
#include <vector>

namespace covergrid::cli {

/// Exit statuses (README, "Commands"): 0 success, 1 internal failure, an
/// interrupted run or a failed write on standard output, 2 bad input, 3 a claim refuted, 4 inconclusive, 5 no
/// n in a plan's range.
enum Exit : int {
  exit_ok = 0,
  exit_internal = 1,
  exit_bad_input = 2,
  exit_refuted = 3,
  exit_inconclusive = 4,
  exit_no_n = 5,  // plan: no n in the search range meets the requirements
};

/// The longest message (in bytes) run_cli writes for a refusal; a longer
/// one keeps its start and end and says how much it left out.
inline constexpr std::size_t max_message_chars = 500;

/// Escapes control characters and Unicode line breaks and caps the length:
/// every refusal is one line (README, "Commands").
std::string one_line(const std::string& message);

/// A stream buffer over a file descriptor (standard output in main()) that
/// keeps the errno of the first failed write, so that a full disk or a
/// closed pipe can be reported with its reason ("No space left on device")
/// after the command: iostreams and stdio keep only an error flag. Written
/// here because no library on the list offers it; it is a plain buffered
/// write(2) loop.
class FdOutput : public std::streambuf {
 public:
  /// Line-buffered when `fd` is a terminal (as stdio is), else fully buffered.
  explicit FdOutput(int fd);
  FdOutput(const FdOutput&) = delete;
  FdOutput& operator=(const FdOutput&) = delete;
  ~FdOutput() override { sync(); }
  /// 0, or the errno of the first write that failed.
  int error() const { return error_; }

 protected:
  int_type overflow(int_type ch) override;
  std::streamsize xsputn(const char_type* s, std::streamsize n) override;
  int sync() override;

 private:
  bool drain();
  int fd_;
  bool line_buffered_;
  int error_ = 0;
  char buffer_[1 << 16];
};

/// Runs `covergrid <args...>` (args excludes the program name) and returns the
/// exit status; normal output goes to `out`, messages and progress to `err`.
int run_cli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

}  // namespace covergrid::cli
