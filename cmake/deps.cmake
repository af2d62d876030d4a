# Debian 12 packages; see scripts/install-deps.sh for the apt line.
find_package(Threads REQUIRED)
find_package(nlohmann_json 3.11 CONFIG REQUIRED)   # nlohmann_json::nlohmann_json
find_package(CLI11 2.1 CONFIG REQUIRED)            # CLI11::CLI11
find_package(simdjson 3 CONFIG REQUIRED)           # simdjson::simdjson
find_package(GTest 1.12 REQUIRED)                  # GTest::gtest, GTest::gtest_main
find_package(SQLite3 REQUIRED)                     # SQLite::SQLite3
find_package(OpenSSL 3 REQUIRED)                   # OpenSSL::Crypto
find_package(ZLIB REQUIRED)                        # ZLIB::ZLIB
find_package(benchmark 1.7 CONFIG QUIET)           # optional: benchmark::benchmark
find_package(PkgConfig REQUIRED)
pkg_check_modules(RE2      REQUIRED IMPORTED_TARGET re2)          # PkgConfig::RE2
pkg_check_modules(XXHASH   REQUIRED IMPORTED_TARGET libxxhash)    # PkgConfig::XXHASH
pkg_check_modules(UTF8PROC REQUIRED IMPORTED_TARGET libutf8proc)  # PkgConfig::UTF8PROC
pkg_check_modules(ZSTD     REQUIRED IMPORTED_TARGET libzstd)      # PkgConfig::ZSTD

# Python with Debian's reference libraries (python3-stdnum, -phonenumbers,
# -scipy, -sklearn) lives at /usr/bin/python3; a pyenv python3 earlier on PATH
# does not see them.
set(PREFSIFT_REF_PYTHON /usr/bin/python3 CACHE FILEPATH "Python with Debian's reference libraries")
