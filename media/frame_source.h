#pragma once
// Frames of one clip, as 8-bit grey images, from a video file or a folder of numbered images.
//
// Video files are read through OpenCV's FFmpeg backend (cv::VideoCapture with CAP_FFMPEG).
// `read()` always returns 3-channel BGR there, even for grey files (docs/platform.md, "Video reading"), so every
// frame is converted with cv::cvtColor(BGR2GRAY); that conversion counts as part of decoding.
//
// Image folders: every image file (media/files.h: one list of extensions for every input) whose
// name holds a number is a frame. The frame index is the file's number minus the
// smallest number in the folder (the numbering may start anywhere); when names hold several
// numbers, the LAST one counts ("cam2_take3_000123.png" is number 123). A number missing from the
// sequence is a frame that cannot be read: Read() reports it as an error and the clip goes on.
// Colour images are converted to grey. 16-bit images are scaled to 8 bits by their significant
// bits: the largest value over the first kBitDepthFrames frames (from the first that decodes)
// gives the bit count b (SignificantBits16: 12 for 12-bit camera data stored as 0-4095 in
// 16-bit TIFF or PNG), and a frame is scaled by 255 / (2^b - 1), later values above 2^b - 1
// clipped; the source says so in its warnings (Scaling16Note). Only the first kBitDepthFrames
// files are looked at, so an 8-bit folder is not decoded twice; 16-bit frames that appear only
// later (a folder of mixed depths) are scaled as 16 bits, and the warning says so. Without this, 12-bit data scaled as
// 16-bit reads as 0-15 grey levels and no marker is found.
//
// Faults, per DEVELOPERS.md ("Conventions": three ways to fail):
// - a clip that cannot be opened at all (missing path, an empty file, not a video, a folder
//   without numbered images, no frame decodes) -> FrameSource::Open throws std::runtime_error
//   naming the file and saying what to do;
// - a frame that does not decode, a missing number in a folder, a file that ends before the
//   frame count its container announces, a frame whose size differs from the first -> returned
//   as data (ReadStatus and a message naming the file and frame, and the last good frame for a
//   truncated file); the caller keeps reading what follows, the frame is left empty.
//
// A FrameSource holds no global state: several may run at once on separate threads.

#include <opencv2/core.hpp>

#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <vector>

namespace dropfit::media {

struct FrameSourceInfo {
  std::string path;                     // the clip as given
  bool image_sequence = false;          // true: a folder of numbered images
  cv::Size size;                        // [px] size of the first frame; every frame must match
  std::optional<int> announced_frames;  // frame count the container (or the folder) announces
  std::optional<double> container_fps;  // [frames/s] rate stored in the container (videos only)
  std::string codec;                    // FourCC of a video ("MJPG", "FFV1", ...), or "images"
  std::vector<std::string> warnings;    // e.g. 16-bit frames scaled to 8 bits, gaps in numbering
};

enum class ReadStatus {
  kFrame,  // `grey` holds the next frame
  kError,  // this frame could not be read (message says why); later frames may still follow
  kEnd,    // no more frames
};

struct FrameRead {
  ReadStatus status = ReadStatus::kEnd;
  int frame = 0;         // index of the frame in the clip, counting from 0
  std::string message;   // for kError: names the file and frame, and what went wrong
  bool is_frame = true;  // false for an error that is no frame of the clip (decoding stopped)
};

class FrameSource {
 public:
  // Opens a video file or a folder of numbered images. Throws std::runtime_error naming the
  // path and what to do when nothing can be read from it.
  static std::unique_ptr<FrameSource> Open(const std::filesystem::path& clip);

  virtual ~FrameSource() = default;
  const FrameSourceInfo& info() const { return info_; }

  // Reads the next frame into `grey` (CV_8UC1, reusing its buffer when the size fits).
  virtual FrameRead Read(cv::Mat& grey) = 0;

 protected:
  FrameSourceInfo info_;
};

// 16-bit frames looked at for their significant bits.
inline constexpr int kBitDepthFrames = 8;
// Bits needed for `largest_value` of 16-bit data, at least 8 and at most 16.
int SignificantBits16(int largest_value);
// What the scaling of 16-bit data did, for warnings: "16-bit images were scaled to 8 bits for
// tracking as 12-bit data (largest value 4095 over the first 8 frames: values / 4095 x 255, ...)".
std::string Scaling16Note(int bits, int largest_value, int frames);

// The image files of a numbered sequence, sorted by their number, with the numbers.
struct NumberedFile {
  long long number = 0;
  std::filesystem::path path;
};
// Lists the numbered image files of `folder` (see the rules above). Throws std::runtime_error
// when the folder cannot be listed or two files carry the same number.
std::vector<NumberedFile> ListNumberedImages(const std::filesystem::path& folder);

}  // namespace dropfit::media
