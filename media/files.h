#pragma once
// What kind of file a path is, reading still images and chosen video frames as 8-bit grey, and
// the one fingerprint of an input (file or folder). Used by calibration input (calib/) and by
// clips (media/frame_source.h, the folder run's re-run cache) alike.
//
// One rule for extensions (case-insensitive):
//   images  .png .jpg .jpeg .bmp .tif .tiff .pgm .ppm
//   videos  .mp4 .mov .avi .mkv .m4v .webm

#include <opencv2/core.hpp>

#include <cstdint>
#include <filesystem>
#include <functional>
#include <string>
#include <vector>

namespace dropfit::media {

bool IsImageFile(const std::filesystem::path& path);
bool IsVideoFile(const std::filesystem::path& path);
// The image extensions as a list for messages: ".png, .jpg, .jpeg, .bmp, .tif, .tiff, .pgm, .ppm".
std::string ImageExtensionsText();

// Reads a still image as 8-bit grey (OpenCV's IMREAD_GRAYSCALE conversion; 16-bit data scaled by
// its significant bits, as media/frame_source.h says, and then `note`, when given, says so).
// Throws std::runtime_error beginning with `role` and the path when the file is missing or does
// not decode, saying which files are accepted.
cv::Mat ReadGreyImage(const std::filesystem::path& path, const std::string& role, std::string* note = nullptr);

// Frames of a video at chosen indices (ascending, from 0), decoded to 8-bit grey; frames in
// between are skipped without decoding. `frames_total` is the container's count, or the count
// found by reading through when the container does not say. Throws std::runtime_error naming
// the file when it cannot be opened or holds no frames.
struct VideoFrameVisitor {
  // Called once before any frame with the clip's frame count; returns the indices wanted.
  std::function<std::vector<long>(long frames_total)> choose;
  // Called for each wanted frame that decodes, in order.
  std::function<void(long index, const cv::Mat& grey)> visit;
};
// Returns how many wanted frames were decoded.
long VisitVideoFrames(const std::filesystem::path& video, const VideoFrameVisitor& visitor);

// FNV-1a, 64 bits (Fowler, Noll & Vo; offset basis 0xcbf29ce484222325, prime 0x100000001b3;
// from memory, checked in tests/media/files_test.cpp against the published test vector
// FNV-1a("a") = af63dc4c8601ec8c). Not cryptographic: it tells inputs apart, nothing more.
class Fnv1a64 {
 public:
  void Add(const void* data, size_t bytes);
  void Add(const std::string& bytes) { Add(bytes.data(), bytes.size()); }
  uint64_t value() const { return h_; }
  std::string Hex() const;  // 16 lower-case hex digits

 private:
  uint64_t h_ = 0xcbf29ce484222325ULL;
};
std::string Fnv1a64Hex(const std::string& bytes);
// Of a file's bytes. Throws std::runtime_error naming the file when it cannot be read.
std::string Fnv1a64HexOfFile(const std::filesystem::path& path);

// The fingerprint of an input, to tell whether it changed since a result was made from it: for a
// file the FNV-1a of its name and bytes; for a folder (numbered images) of every regular file's
// name and bytes in name order. 16 hex digits.
std::string InputFingerprint(const std::filesystem::path& path);

}  // namespace dropfit::media
