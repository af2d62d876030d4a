#include "io/line_reader.h"

#include <zlib.h>
#include <zstd.h>

#include <cstring>
#include <vector>

namespace prefsift {
namespace {

// Decompressing byte stream over a ReadableFile.
class Source {
 public:
  virtual ~Source() = default;
  virtual Result<size_t> Read(char* buf, size_t n) = 0;
};

class PlainSource : public Source {
 public:
  PlainSource(std::unique_ptr<ReadableFile> f, std::string head) : f_(std::move(f)), head_(std::move(head)) {}
  Result<size_t> Read(char* buf, size_t n) override {
    if (pos_ < head_.size()) {
      size_t k = std::min(n, head_.size() - pos_);
      std::memcpy(buf, head_.data() + pos_, k);
      pos_ += k;
      return k;
    }
    return f_->Read(buf, n);
  }

 private:
  std::unique_ptr<ReadableFile> f_;
  std::string head_;
  size_t pos_ = 0;
};

class GzipSource : public Source {
 public:
  GzipSource(std::unique_ptr<Source> raw, std::string path) : raw_(std::move(raw)), path_(std::move(path)), in_(1 << 16) {
    std::memset(&z_, 0, sizeof(z_));
    ok_ = inflateInit2(&z_, 15 + 32) == Z_OK;  // 32: accept gzip (and zlib) headers
  }
  ~GzipSource() override { inflateEnd(&z_); }
  Result<size_t> Read(char* buf, size_t n) override {
    if (!ok_) return Status::Input("cannot start gzip decoding of " + path_);
    z_.next_out = reinterpret_cast<Bytef*>(buf);
    z_.avail_out = static_cast<uInt>(n);
    while (z_.avail_out == n) {
      if (z_.avail_in == 0) {
        if (eof_) {
          if (!stream_end_) return Status::Input(path_ + ": the gzip stream is truncated");
          return size_t{0};
        }
        auto got = raw_->Read(reinterpret_cast<char*>(in_.data()), in_.size());
        if (!got.ok()) return got.status();
        if (got.value() == 0) { eof_ = true; continue; }
        z_.next_in = in_.data();
        z_.avail_in = static_cast<uInt>(got.value());
      }
      if (stream_end_) {
        // Concatenated gzip members (as `cat a.gz b.gz` makes) are one stream.
        inflateReset(&z_);
        stream_end_ = false;
      }
      int rc = inflate(&z_, Z_NO_FLUSH);
      if (rc == Z_STREAM_END) {
        stream_end_ = true;
      } else if (rc != Z_OK && rc != Z_BUF_ERROR) {
        return Status::Input(path_ + ": gzip data is corrupt (" + (z_.msg ? z_.msg : "inflate error") + ")");
      }
    }
    return n - z_.avail_out;
  }

 private:
  std::unique_ptr<Source> raw_;
  std::string path_;
  std::vector<unsigned char> in_;
  z_stream z_;
  bool ok_ = false, eof_ = false, stream_end_ = false;
};

class ZstdSource : public Source {
 public:
  ZstdSource(std::unique_ptr<Source> raw, std::string path)
      : raw_(std::move(raw)), path_(std::move(path)), in_(ZSTD_DStreamInSize()), dctx_(ZSTD_createDCtx()) {}
  ~ZstdSource() override { ZSTD_freeDCtx(dctx_); }
  Result<size_t> Read(char* buf, size_t n) override {
    ZSTD_outBuffer out{buf, n, 0};
    while (out.pos == 0) {
      if (inb_.pos == inb_.size) {
        if (eof_) {
          if (last_ret_ != 0) return Status::Input(path_ + ": the zstd stream is truncated");
          return size_t{0};
        }
        auto got = raw_->Read(in_.data(), in_.size());
        if (!got.ok()) return got.status();
        if (got.value() == 0) { eof_ = true; continue; }
        inb_ = ZSTD_inBuffer{in_.data(), got.value(), 0};
      }
      size_t ret = ZSTD_decompressStream(dctx_, &out, &inb_);
      if (ZSTD_isError(ret)) return Status::Input(path_ + ": zstd data is corrupt (" + ZSTD_getErrorName(ret) + ")");
      last_ret_ = ret;
    }
    return out.pos;
  }

 private:
  std::unique_ptr<Source> raw_;
  std::string path_;
  std::vector<char> in_;
  ZSTD_DCtx* dctx_;
  ZSTD_inBuffer inb_{nullptr, 0, 0};
  size_t last_ret_ = 0;
  bool eof_ = false;
};

class LineReaderImpl : public LineReader {
 public:
  LineReaderImpl(std::unique_ptr<Source> src, Compression c, size_t max_line, const LineRange& range)
      : src_(std::move(src)), compression_(c), max_line_(max_line), buf_(1 << 20), begin_(range.begin),
        end_(range.end), line_no_(range.first_line - 1) {}

  Compression compression() const override { return compression_; }
  uint64_t bytes_read() const override { return consumed_; }
  bool at_file_end() const override { return at_file_end_; }

  Result<Next> Read(std::string_view* line, uint64_t* line_no) override {
    bool too_long = false;
    line_.clear();
    if (end_ != UINT64_MAX && begin_ + consumed_ >= end_) {
      // The range ends here (a line belongs to the part it starts in): is
      // there more of the file after it?
      if (pos_ == len_ && !eof_) {
        auto got = src_->Read(buf_.data(), buf_.size());
        if (!got.ok()) return got.status();
        pos_ = 0;
        len_ = got.value();
        eof_ = len_ == 0;
      }
      at_file_end_ = pos_ == len_;
      return Next::kEnd;
    }
    for (;;) {
      if (pos_ == len_) {
        if (eof_) break;
        auto got = src_->Read(buf_.data(), buf_.size());
        if (!got.ok()) return got.status();
        pos_ = 0;
        len_ = got.value();
        if (len_ == 0) { eof_ = true; break; }
      }
      const char* start = buf_.data() + pos_;
      const char* nl = static_cast<const char*>(std::memchr(start, '\n', len_ - pos_));
      size_t take = nl ? static_cast<size_t>(nl - start) : len_ - pos_;
      if (!too_long) {
        if (line_.size() + take > max_line_ + 1) {  // +1: room for a CR
          too_long = true;
          line_.clear();
          line_.shrink_to_fit();
        } else {
          line_.append(start, take);
        }
      }
      pos_ += take;
      consumed_ += take;
      if (nl) {
        ++pos_;
        ++consumed_;
        return Finish(line, line_no, too_long);
      }
    }
    at_file_end_ = true;
    if (line_.empty() && !too_long) return Next::kEnd;  // nothing after the last LF
    return Finish(line, line_no, too_long);
  }

 private:
  Result<Next> Finish(std::string_view* line, uint64_t* line_no, bool too_long) {
    *line_no = ++line_no_;
    if (too_long) return Next::kTooLong;
    if (!line_.empty() && line_.back() == '\r') line_.pop_back();
    if (begin_ == 0 && line_no_ == 1 && line_.size() >= 3 && std::memcmp(line_.data(), "\xEF\xBB\xBF", 3) == 0) line_.erase(0, 3);
    if (line_.size() > max_line_) return Next::kTooLong;
    *line = line_;
    return Next::kLine;
  }

  std::unique_ptr<Source> src_;
  Compression compression_;
  size_t max_line_;
  std::vector<char> buf_;
  size_t pos_ = 0, len_ = 0;
  bool eof_ = false;
  std::string line_;
  uint64_t begin_ = 0, end_ = UINT64_MAX;  // the range, in bytes of the file
  uint64_t line_no_ = 0;
  uint64_t consumed_ = 0;  // from begin_
  bool at_file_end_ = false;
};

}  // namespace

Result<std::unique_ptr<LineReader>> LineReader::Open(FileSystem* fs, const std::string& path, size_t max_line_bytes) {
  return Open(fs, path, max_line_bytes, LineRange{});
}

Result<std::unique_ptr<LineReader>> LineReader::Open(FileSystem* fs, const std::string& path, size_t max_line_bytes,
                                                     const LineRange& range) {
  if (range.first_line == 0 || range.end < range.begin || (range.begin == 0 && range.first_line != 1)) {
    return Status::Usage(path + ": a part must start at line 1 at byte 0, and end at or after its start");
  }
  auto f = fs->OpenRead(path);
  if (!f.ok()) return f.status();
  std::unique_ptr<ReadableFile> file = std::move(f).value();
  // Sniff the magic bytes, then hand them back to the stream.
  std::string head(4, '\0');
  size_t have = 0;
  while (have < 4) {
    auto got = file->Read(head.data() + have, 4 - have);
    if (!got.ok()) return got.status();
    if (got.value() == 0) break;
    have += got.value();
  }
  head.resize(have);
  Compression c = Compression::kNone;
  if (have >= 2 && static_cast<unsigned char>(head[0]) == 0x1f && static_cast<unsigned char>(head[1]) == 0x8b) {
    c = Compression::kGzip;
  } else if (have >= 4 && std::memcmp(head.data(), "\x28\xb5\x2f\xfd", 4) == 0) {
    c = Compression::kZstd;
  }
  if (c != Compression::kNone && !range.whole()) {
    return Status::Usage(path + ": a compressed input is read whole: its one part must start at byte 0 and have "
                                "no end (\"end\": null)");
  }
  if (range.begin > 0) {
    // The byte before the part must end a line (a part starts at a line start).
    char before = 0;
    if (range.begin - 1 < have) {
      before = head[range.begin - 1];
      head.erase(0, std::min<uint64_t>(range.begin, have));
    } else {
      Status s = file->Skip(range.begin - 1 - have);
      if (!s.ok()) return Status::Input(path + ": " + s.message());
      auto got = file->Read(&before, 1);
      if (!got.ok()) return got.status();
      if (got.value() == 0) return Status::Input(path + ": the file ends before the part's start");
      head.clear();
    }
    bool more = !head.empty();  // a part at the very end of a file without a last LF is empty, not mid-line
    if (before != '\n' && !more) {
      char next = 0;
      auto got = file->Read(&next, 1);
      if (!got.ok()) return got.status();
      more = got.value() > 0;
    }
    if (before != '\n' && more) {
      return Status::Input(path + ": the part starting at byte " + std::to_string(range.begin) +
                           " does not start at a line start; cut the parts again");
    }
  }
  std::unique_ptr<Source> src(new PlainSource(std::move(file), head));
  if (c == Compression::kGzip) src.reset(new GzipSource(std::move(src), path));
  if (c == Compression::kZstd) src.reset(new ZstdSource(std::move(src), path));
  return std::unique_ptr<LineReader>(new LineReaderImpl(std::move(src), c, max_line_bytes, range));
}

}  // namespace prefsift
