#pragma once
// The log lines of the libraries under media/ (OpenCV and the FFmpeg it decodes with), which
// write to the terminal on their own ("[h264 @ 0x...] error while decoding MB ...", OpenCV's
// "[ WARN:0@...]" lines). dropfit reports a clip's problems through its own messages
// (media/frame_source.h), so by default those lines are silenced; `--verbose` lets them through.
//
// How: OpenCV 4.6 sets FFmpeg's log level once, when its FFmpeg backend is first used, from the
// environment variable OPENCV_FFMPEG_LOGLEVEL (an FFmpeg level; -8 is AV_LOG_QUIET) when it is
// set, else to AV_LOG_ERROR; OpenCV's own lines follow cv::utils::logging::setLogLevel. Call this
// before the first clip is opened. A value the user set in the environment is kept.

namespace dropfit::media {

// quiet = true: FFmpeg and OpenCV print nothing (errors included); false: their defaults.
void SetLibraryLogQuiet(bool quiet);

}  // namespace dropfit::media
