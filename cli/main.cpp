// The streakwright executable: subcommands registered from cli/cmd_*.cpp.
#include <cstdio>
#include <iostream>

#include <CLI/CLI.hpp>

#include "cli/analysis.h"
#include "cli/commands.h"
#include "retrieval/core/error.h"
#include "streakwright_version.h"

namespace sw::cli {

int& exit_code() {
  static int code = 0;
  return code;
}

int guarded(const char* command, const std::function<int()>& body) {
  try {
    return body();
  } catch (const InterruptedError& e) {
    std::cerr << "streakwright " << command << ": " << e.what() << "\n";
    return e.exit_code();
  } catch (const sw::Error& e) {
    std::cerr << "streakwright " << command << ": error: " << e.what() << "\n";
    return e.exit_code();
  } catch (const std::exception& e) {
    std::cerr << "streakwright " << command << ": internal error: " << e.what()
              << "\n(please report this with the input that caused it)\n";
    return 1;
  }
}

}  // namespace sw::cli

int main(int argc, char** argv) {
  CLI::App app{
      "streakwright " STREAKWRIGHT_VERSION
      ": attosecond streaking and RABBITT scan analysis.\n"
      "Reconstructs XUV pulses and IR streaking fields from photoelectron energy-vs-delay scans,\n"
      "analyses RABBITT sidebands, and decides isolated pulse versus train.\n"
      "Exit codes: 0 ok, 1 internal error, 2 bad usage, 3 bad input data, 4 numerical failure\n"
      "(best estimate still written, flagged), 5 batch finished with failed scans,\n"
      "130/143 stopped by SIGINT/SIGTERM (nothing written). See docs/cli.md.",
      "streakwright"};
  app.set_version_flag("--version", std::string("streakwright ") + STREAKWRIGHT_VERSION);
  app.require_subcommand(1);
  app.fallthrough(false);
  sw::cli::add_simulate_command(app);
  sw::cli::add_info_command(app);
  sw::cli::add_retrieve_command(app);
  sw::cli::add_rabbitt_command(app);
  sw::cli::add_classify_command(app);
  sw::cli::add_batch_command(app);
  sw::cli::add_summarize_command(app);
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int rc = app.exit(e);
    return rc == 0 ? 0 : 2;
  }
  return sw::cli::exit_code();
}
