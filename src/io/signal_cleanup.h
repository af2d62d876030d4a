// Removal of partial outputs when the process is stopped by a signal.
//
// An output folder is written under a staging name and renamed at the end
// (output_dir.h). A failed run removes it as its objects unwind; a run stopped
// by SIGINT, SIGTERM or SIGHUP does not unwind, so the staging paths are also
// kept in a process-wide list that a signal-waiting thread empties before the
// process ends with that signal's default action.
// Thread-safety: all functions may be called from any thread.
#pragma once

#include <string>

namespace prefsift {

// Call once, early in main and before any other thread starts: blocks the
// three signals in every thread and starts the thread that waits for them.
// Also ignores SIGPIPE, so a closed log pipe fails writes instead of ending
// the run without cleaning up.
void RemovePartialOutputsOnSignal();

// Adds / removes a path (file or folder) to remove if a signal stops the run.
void RegisterPartialOutput(const std::string& path);
void UnregisterPartialOutput(const std::string& path);

}  // namespace prefsift
