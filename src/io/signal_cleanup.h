// Removal of partial outputs when the process is stopped by a signal.
//
// An output folder is written under a staging name and renamed at the end
// (output_dir.h). A failed run removes it as its objects unwind; a run stopped
// by SIGINT, SIGTERM or SIGHUP does not unwind, so the staging paths are also
// kept in a process-wide list that a signal-waiting thread empties before the
// process ends with that signal's default action.
// Thread-safety: all functions may be called from any thread.
#pragma once

#include <functional>
#include <string>

#include "core/status.h"

namespace prefsift {

// Call once, early in main and before any other thread starts: blocks the
// three signals in every thread and starts the thread that waits for them.
// Also ignores SIGPIPE, so a closed log pipe fails writes instead of ending
// the run without cleaning up.
void RemovePartialOutputsOnSignal();

// Makes a path (file or folder) with `create` and adds it to the paths to
// remove if a signal stops the run, as one step: a signal finds it either
// made and listed or not made. Once a signal has arrived nothing is made
// (an error). `create` must not call these functions.
Status CreatePartialOutput(const std::string& path, const std::function<Status()>& create);
// Takes a path off that list.
void UnregisterPartialOutput(const std::string& path);

}  // namespace prefsift
