#pragma once
// Atomic file output: every file dropfit writes goes through here, so a reader never sees a
// half-written file and a failed write leaves the previous file as it was.
//
// Method: write to a temporary file in the same folder ("<name>.tmp-<pid>-<n>"), flush and
// fsync it, then rename it over the target (rename is atomic within one file system on POSIX).

#include <filesystem>
#include <functional>
#include <ostream>
#include <string>

namespace dropfit::cli {

// Writes `content` to `path` atomically. Throws std::runtime_error naming the path and the
// system's reason when the folder cannot be written; the target is then untouched.
void WriteFileAtomically(const std::filesystem::path& path, const std::string& content);

// Streams into a temporary file through `writer`, then renames it over `path`. If `writer`
// throws, the temporary file is removed, the target is untouched and the exception propagates.
void WriteFileAtomically(const std::filesystem::path& path, const std::function<void(std::ostream&)>& writer);

}  // namespace dropfit::cli
