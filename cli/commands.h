#pragma once
// Subcommands of the streakwright executable. Each lives in its own cli/cmd_<name>.cpp and
// registers itself on the CLI11 app with add_<name>_command(); main.cpp calls them in order.
// Exit codes (documented in docs/cli.md): 0 success, 1 internal error, 2 bad usage,
// 3 bad input data, 4 numerical failure (result still written, flagged), 5 batch with failures.

#include <functional>
#include <memory>
#include <string>
#include <utility>

#include <CLI/CLI.hpp>

namespace sw::cli {

void add_simulate_command(CLI::App& app);
void add_info_command(CLI::App& app);
void add_retrieve_command(CLI::App& app);
void add_rabbitt_command(CLI::App& app);
void add_classify_command(CLI::App& app);
void add_batch_command(CLI::App& app);
void add_summarize_command(CLI::App& app);

/// Runs `body` and turns sw::Error / std::exception into a message on stderr and the exit
/// code of the error's kind. Every subcommand's callback goes through it.
int guarded(const char* command, const std::function<int()>& body);

/// Exit code a subcommand's callback stored (CLI11 callbacks return void).
int& exit_code();

/// Registers the subcommand `name` (one-line `description`; `footer` below its options in
/// --help) with a fresh Args for its options to bind to. Calling the subcommand runs `run(args)`
/// through guarded() and stores its exit code. Returns the subcommand and its Args.
template <class Args, class Run>
std::pair<CLI::App*, std::shared_ptr<Args>> add_command(CLI::App& app, const char* name, Run run,
                                                        const char* description,
                                                        const std::string& footer) {
  auto args = std::make_shared<Args>();
  CLI::App* cmd = app.add_subcommand(name, description);
  cmd->footer(footer);
  cmd->callback([args, run, name] { exit_code() = guarded(name, [&] { return run(*args); }); });
  return {cmd, args};
}

}  // namespace sw::cli
