#include "media/library_log.h"

#include <opencv2/core/utils/logger.hpp>

#include <cstdlib>

namespace dropfit::media {

void SetLibraryLogQuiet(bool quiet) {
  if (quiet) {
    ::setenv("OPENCV_FFMPEG_LOGLEVEL", "-8", /*overwrite=*/0);  // AV_LOG_QUIET
    cv::utils::logging::setLogLevel(cv::utils::logging::LOG_LEVEL_SILENT);
  } else {
    cv::utils::logging::setLogLevel(cv::utils::logging::LOG_LEVEL_WARNING);
  }
}

}  // namespace dropfit::media
