// run_cli(): builds the command set, parses, and maps errors to exit statuses.
#include "commands.hpp"
#include "covergrid/output/tables.hpp"
#include "covergrid/version.hpp"

#include <fmt/format.h>

#include <unistd.h>

#include <cerrno>
#include <ostream>

namespace covergrid::cli {

/// A message as one line of bounded length: control characters that came
/// from the input (a newline or tab inside a string value) are written as
/// escapes, and so are the Unicode line breaks NEL (U+0085), LINE SEPARATOR
/// (U+2028) and PARAGRAPH SEPARATOR (U+2029), which Unicode-aware readers
/// break lines at. A message longer than max_message_chars keeps its start
/// (file:line: key) and its end (the reason) and says how much it left out,
/// so a 90 kB value echoed back cannot flood a terminal or a log.
std::string one_line(const std::string& message) {
  std::string out;
  for (std::size_t i = 0; i < message.size(); ++i) {
    const char ch = message[i];
    const auto byte = [&](std::size_t k) {
      return k < message.size() ? static_cast<unsigned char>(message[k]) : 0u;
    };
    if (ch == '\n') {
      out += "\\n";
    } else if (ch == '\t') {
      out += "\\t";
    } else if (ch == '\r') {
      out += "\\r";
    } else if (static_cast<unsigned char>(ch) < 0x20 || ch == 0x7f) {
      out += fmt::format("\\x{:02x}", static_cast<unsigned>(static_cast<unsigned char>(ch)));
    } else if (byte(i) == 0xc2 && byte(i + 1) == 0x85) {
      out += "\\u0085";
      i += 1;
    } else if (byte(i) == 0xe2 && byte(i + 1) == 0x80 && (byte(i + 2) == 0xa8 || byte(i + 2) == 0xa9)) {
      out += byte(i + 2) == 0xa8 ? "\\u2028" : "\\u2029";
      i += 2;
    } else {
      out += ch;
    }
  }
  if (out.size() > max_message_chars) {
    const std::size_t head = max_message_chars * 3 / 5, tail = max_message_chars / 5;
    // Cut at UTF-8 character starts, never inside a character.
    std::size_t h = head, t = out.size() - tail;
    while (h > 0 && (static_cast<unsigned char>(out[h]) & 0xc0) == 0x80) --h;
    while (t < out.size() && (static_cast<unsigned char>(out[t]) & 0xc0) == 0x80) ++t;
    out = fmt::format("{} [... {} bytes left out ...] {}", out.substr(0, h), t - h, out.substr(t));
  }
  return out;
}

FdOutput::FdOutput(int fd) : fd_(fd), line_buffered_(::isatty(fd) == 1) {
  setp(buffer_, buffer_ + sizeof buffer_);
}

bool FdOutput::drain() {
  const char* p = pbase();
  while (p < pptr()) {
    const ssize_t k = ::write(fd_, p, static_cast<std::size_t>(pptr() - p));
    if (k < 0 && errno == EINTR) continue;
    if (k <= 0) {
      if (error_ == 0) error_ = k < 0 ? errno : EIO;
      break;
    }
    p += k;
  }
  // What could not be written is dropped: the first error is kept and the
  // command's status reports it.
  setp(buffer_, buffer_ + sizeof buffer_);
  return error_ == 0;
}

FdOutput::int_type FdOutput::overflow(int_type ch) {
  const bool ok = drain();
  if (traits_type::eq_int_type(ch, traits_type::eof()))
    return ok ? traits_type::not_eof(ch) : traits_type::eof();
  *pptr() = traits_type::to_char_type(ch);
  pbump(1);
  if (line_buffered_ && traits_type::to_char_type(ch) == '\n') drain();
  return ok ? ch : traits_type::eof();
}

std::streamsize FdOutput::xsputn(const char_type* s, std::streamsize n) {
  const std::streamsize put = std::streambuf::xsputn(s, n);
  if (line_buffered_ && std::char_traits<char>::find(s, static_cast<std::size_t>(n), '\n')) drain();
  return put;
}

int FdOutput::sync() { return drain() ? 0 : -1; }

int run_cli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  CLI::App app{fmt::format("covergrid {} — how confidence intervals for a proportion really behave: exact\n"
                           "coverage, tail misses and width of interval methods over grids of n and p.",
                           tool_version),
               "covergrid"};
  app.require_subcommand(1);
  app.set_version_flag("--version", std::string(tool_version));
  app.footer(std::string(1, '\n').append(output::wrap_text(output::coverage_caution, 100)));

  std::vector<Command> commands;
  commands.push_back(add_run_command(app));
  commands.push_back(add_intervals_command(app));
  commands.push_back(add_methods_command(app));
  commands.push_back(add_inspect_command(app));
  commands.push_back(add_audit_command(app));
  commands.push_back(add_plan_command(app));
  commands.push_back(add_rank_command(app));
  commands.push_back(add_merge_command(app));
  commands.push_back(add_report_command(app));

  if (!args.empty() && !args[0].empty() && args[0][0] != '-') {
    std::string names;
    bool known = false;
    for (const CLI::App* sub : app.get_subcommands([](CLI::App*) { return true; })) {
      known |= sub->get_name() == args[0];
      names += (names.empty() ? "" : ", ") + sub->get_name();
    }
    if (!known) {
      err << "covergrid: "
          << one_line(
                 fmt::format("unknown command '{}' (commands: {}; see covergrid --help)", args[0], names))
          << '\n';
      return exit_bad_input;
    }
  }
  try {
    std::vector<std::string> reversed(args.rbegin(), args.rend());
    app.parse(reversed);
  } catch (const CLI::CallForHelp&) {
    out << app.help();
    return exit_ok;
  } catch (const CLI::CallForAllHelp&) {
    out << app.help("", CLI::AppFormatMode::All);
    return exit_ok;
  } catch (const CLI::CallForVersion&) {
    out << tool_version << '\n';
    return exit_ok;
  } catch (const CLI::ParseError& e) {
    err << "covergrid: " << one_line(fmt::format("{} (see covergrid --help)", e.what())) << '\n';
    return exit_bad_input;
  }

  try {
    for (const auto& c : commands)
      if (c.app->parsed()) return c.run(out, err);
  } catch (const InputError& e) {
    err << "covergrid: " << one_line(e.what()) << '\n';
    return exit_bad_input;
  } catch (const std::exception& e) {
    err << "covergrid: internal error: " << one_line(e.what()) << '\n';
    return exit_internal;
  }
  return exit_internal;
}

}  // namespace covergrid::cli
