#pragma once
// Writing rendered 8-bit grey frames as a clip: an MJPG .avi (our own RIFF writer), lossless
// FFV1 in .mov, H.264 in .mp4, or a folder of numbered PNG files.
//
// Why our own AVI writer: OpenCV 4.6's MJPG writers are unreliable here (docs/platform.md, "MJPG writers":
// the built-in one gives garbage for grey frames, the FFmpeg one corrupts a few colour frames
// and refuses a quality setting). Each frame is encoded with cv::imencode(".jpg", quality) and
// stored as one '00dc' chunk of a plain AVI 1.0 file (RIFF 'AVI ', one video stream, an idx1
// index), following Microsoft's "AVI RIFF File Reference" (the AVIMAINHEADER, AVISTREAMHEADER,
// BITMAPINFOHEADER and AVIOLDINDEX layouts). AVI 1.0 files end at 1 GiB; a larger clip is
// refused with a message.
//
// Frame rates. The container (playback) rate is written into the file; the true capture rate
// belongs in manifest.csv (`capture_fps`), which wins over the container. Measured pitfalls
// (docs/platform.md, "Video writing"): OpenCV's FFmpeg .avi muxer drops frames above 1,000 frames/s and .mkv reports a
// wrong rate and count, so FFV1 goes into .mov, which is exact at any rate. Our own AVI writer
// stores any rate exactly; readers are safest with a rate of at most 1,000 frames/s.

#include <opencv2/core.hpp>

#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

namespace dropfit::media {

enum class VideoFormat {
  kMjpgAvi,    // "mjpg": JPEG frames (quality settable) in an .avi written by MjpgAviWriter
  kFfv1Mov,    // "ffv1": lossless FFV1 in .mov through cv::VideoWriter (FFmpeg)
  kH264Mp4,    // "h264": H.264 in .mp4 through cv::VideoWriter; smooths noise away: demo only
  kPngFrames,  // "png": a folder <clip>/frame_00000.png, frame_00001.png, ...
};
// "mjpg", "ffv1", "h264", "png".
std::string ToString(VideoFormat format);
// Throws std::invalid_argument naming the unknown string and listing the valid ones.
VideoFormat VideoFormatFromString(const std::string& text);
// ".avi", ".mov", ".mp4", "" (a folder).
std::string FileExtension(VideoFormat format);

// A destination for frames. Frames are CV_8UC1 of the size given at opening.
class FrameSink {
 public:
  virtual ~FrameSink() = default;
  virtual void Write(const cv::Mat& grey8) = 0;
  // Finishes the file (index, sizes). Called by the destructor if not called before, but
  // call it yourself to see errors (it throws std::runtime_error naming the path).
  virtual void Close() = 0;
  virtual int frames_written() const = 0;
};

// Opens a sink at `path` (the file, or the folder for kPngFrames, created if missing).
//   container_fps: the rate stored in the container [frames/s]; (0, 1e6].
//   jpeg_quality:  1..100, for kMjpgAvi.
// Throws std::invalid_argument on bad arguments and std::runtime_error when the file cannot
// be opened (naming the path and the format).
std::unique_ptr<FrameSink> OpenFrameSink(const std::filesystem::path& path, VideoFormat format, cv::Size frame_size,
                                         double container_fps, int jpeg_quality = 90);

// The MJPG AVI writer itself.
class MjpgAviWriter final : public FrameSink {
 public:
  // Throws std::runtime_error when the file cannot be created.
  MjpgAviWriter(const std::filesystem::path& path, cv::Size frame_size, double container_fps, int jpeg_quality);
  ~MjpgAviWriter() override;
  MjpgAviWriter(const MjpgAviWriter&) = delete;
  MjpgAviWriter& operator=(const MjpgAviWriter&) = delete;
  void Write(const cv::Mat& grey8) override;
  // Appends one already-encoded JPEG image as the next frame.
  void WriteJpeg(const std::vector<uint8_t>& jpeg);
  void Close() override;
  int frames_written() const override { return static_cast<int>(index_.size()); }

 private:
  struct IndexEntry {
    uint32_t offset;  // from the 'movi' FOURCC
    uint32_t size;
  };
  std::filesystem::path path_;
  cv::Size size_;
  double fps_;
  int quality_;
  std::unique_ptr<std::FILE, int (*)(std::FILE*)> file_;
  uint64_t movi_bytes_ = 4;  // the 'movi' FOURCC itself
  uint32_t max_chunk_ = 0;
  std::vector<IndexEntry> index_;
  bool closed_ = false;
};

}  // namespace dropfit::media
