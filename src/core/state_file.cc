#include "core/state_file.h"

#include <bit>

#include "core/hash.h"

namespace prefsift {
namespace {

// The format is little-endian and numbers are copied as they sit in memory.
static_assert(std::endian::native == std::endian::little, "state files are written on little-endian machines only");

constexpr char kMagic[8] = {'P', 'S', 'F', 'T', 'S', 'T', 'A', 'T'};
constexpr size_t kChecksumBytes = 16;

void Put(std::string* out, const void* p, size_t n) { out->append(static_cast<const char*>(p), n); }

std::string Checksum(std::string_view bytes) {
  Hash128 h = HashBytes(bytes);
  std::string out;
  Put(&out, &h.hi, 8);
  Put(&out, &h.lo, 8);
  return out;
}

}  // namespace

void StateWriter::BeginSection(std::string_view name) {
  section_ = std::string(name);
  body_.clear();
  open_ = true;
}

void StateWriter::EndSection() {
  if (!open_) return;
  const auto name_len = static_cast<uint32_t>(section_.size());
  const uint64_t body_len = body_.size();
  Put(&payload_, &name_len, 4);
  payload_ += section_;
  Put(&payload_, &body_len, 8);
  payload_ += body_;
  body_.clear();
  open_ = false;
}

std::string StateWriter::Finish(std::string_view kind) {
  EndSection();
  std::string out(kMagic, sizeof kMagic);
  const uint32_t version = kStateFormatVersion;
  const auto kind_len = static_cast<uint32_t>(kind.size());
  const uint64_t payload_len = payload_.size();
  Put(&out, &version, 4);
  Put(&out, &kind_len, 4);
  out += kind;
  Put(&out, &payload_len, 8);
  out += payload_;
  out += Checksum(out);
  payload_.clear();
  return out;
}

Result<StateReader> StateReader::Open(std::string bytes, std::string_view kind, const std::string& path) {
  auto bad = [&](const std::string& why) { return Status::Input(path + ": " + why); };
  if (bytes.size() < sizeof kMagic + 4 || std::memcmp(bytes.data(), kMagic, sizeof kMagic) != 0) {
    return bad("not a prefsift state file (the first bytes are not its mark)");
  }
  uint32_t version = 0;
  std::memcpy(&version, bytes.data() + 8, 4);
  if (version != kStateFormatVersion) {
    return bad("state file format version " + std::to_string(version) + ", but this prefsift reads version " +
               std::to_string(kStateFormatVersion) + " only; make the state files again with this prefsift");
  }
  if (bytes.size() < 16 + kChecksumBytes) return bad("the state file is truncated");
  const std::string_view body(bytes.data(), bytes.size() - kChecksumBytes);
  if (Checksum(body) != std::string_view(bytes).substr(body.size())) {
    return bad("the state file's checksum does not match its contents: the file is damaged or truncated");
  }
  uint32_t kind_len = 0;
  std::memcpy(&kind_len, bytes.data() + 12, 4);
  if (16 + uint64_t{kind_len} + 8 > body.size()) return bad("the state file is truncated");
  const std::string_view got_kind(bytes.data() + 16, kind_len);
  if (got_kind != kind) {
    return bad("a state file of kind \"" + std::string(got_kind) + "\" where one of kind \"" + std::string(kind) +
               "\" is needed");
  }
  uint64_t payload_len = 0;
  std::memcpy(&payload_len, bytes.data() + 16 + kind_len, 8);
  const size_t payload_at = 16 + kind_len + 8;
  if (payload_len != body.size() - payload_at) return bad("the state file's length does not match its header");
  StateReader r;
  r.path_ = path;
  r.bytes_ = std::move(bytes);
  r.bytes_.resize(r.bytes_.size() - kChecksumBytes);
  r.pos_ = r.end_ = payload_at;
  r.section_.clear();
  return r;
}

bool StateReader::EnterSection(std::string_view name) {
  // Sections are few: scan from the payload's start (Open checked the header).
  uint32_t kind_len = 0;
  std::memcpy(&kind_len, bytes_.data() + 12, 4);
  size_t at = 16 + size_t{kind_len} + 8;
  while (at + 4 <= bytes_.size()) {
    uint32_t name_len = 0;
    std::memcpy(&name_len, bytes_.data() + at, 4);
    if (at + 4 + uint64_t{name_len} + 8 > bytes_.size()) break;
    const std::string_view got(bytes_.data() + at + 4, name_len);
    uint64_t body_len = 0;
    std::memcpy(&body_len, bytes_.data() + at + 4 + name_len, 8);
    const size_t body_at = at + 4 + name_len + 8;
    if (body_len > bytes_.size() - body_at) break;
    if (got == name) {
      section_ = std::string(name);
      pos_ = body_at;
      end_ = body_at + body_len;
      ok_ = true;
      why_.clear();
      return true;
    }
    at = body_at + body_len;
  }
  return false;
}

Status StateReader::LeaveSection() {
  if (ok_ && pos_ != end_) Fail(std::to_string(end_ - pos_) + " byte(s) left unread");
  if (ok_) return Status::Ok();
  return Status::Input(path_ + ": the state file's section \"" + section_ + "\" is not as this prefsift writes it (" +
                       why_ + ")");
}

void StateReader::Fail(const std::string& why) {
  if (!ok_) return;
  ok_ = false;
  why_ = why;
}

void StateReader::Raw(void* p, size_t n) {
  if (!ok_ || n > end_ - pos_) {
    Fail("it ends too early");
    if (n) std::memset(p, 0, n);
    return;
  }
  if (n) std::memcpy(p, bytes_.data() + pos_, n);
  pos_ += n;
}

std::string StateReader::Str() {
  uint64_t n = Count(1);
  std::string s(n, '\0');
  Raw(s.data(), n);
  return s;
}

uint64_t StateReader::Count(size_t min_bytes) {
  uint64_t n = U64();
  if (!ok_) return 0;
  if (min_bytes > 0 && n > (end_ - pos_) / min_bytes) {
    Fail("a count of " + std::to_string(n) + " does not fit the rest of the section");
    return 0;
  }
  return n;
}

}  // namespace prefsift
