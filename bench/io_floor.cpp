// The I/O floor for the smoothing benchmark: read the benchmark CSV (header, then t,y1,y2 with empty
// cells for missing values), parse every number with fast_float, keep them in memory, then write the same
// count of numbers per row that `statewise smooth` writes (13: t, 2 states + 2 sds, 2 channels × 4 columns)
// with std::to_chars. No estimation at all: a program cannot do the smoothing job faster than this.
// Usage: io_floor INPUT.csv OUTPUT.csv

#include <charconv>
#include <cstdio>
#include <cstring>
#include <string>
#include <vector>

#include <fast_float/fast_float.h>

int main(int argc, char** argv) {
  if (argc != 3) return 2;
  std::FILE* in = std::fopen(argv[1], "rb");
  if (!in) return 2;
  std::string text;
  std::vector<char> chunk(1 << 16);
  std::size_t got;
  while ((got = std::fread(chunk.data(), 1, chunk.size(), in)) > 0) text.append(chunk.data(), got);
  std::fclose(in);

  std::vector<double> values;
  const char* p = text.data();
  const char* end = p + text.size();
  p = static_cast<const char*>(std::memchr(p, '\n', static_cast<std::size_t>(end - p))) + 1;  // header
  while (p < end) {
    for (int field = 0; field < 3; ++field) {
      double value = std::numeric_limits<double>::quiet_NaN();
      if (*p != ',' && *p != '\n') {
        const auto result = fast_float::from_chars(p, end, value);
        p = result.ptr;
      }
      values.push_back(value);
      ++p;  // the delimiter or the newline
    }
  }

  std::FILE* out = std::fopen(argv[2], "wb");
  if (!out) return 2;
  std::string buffer;
  char number[32];
  const std::size_t rows = values.size() / 3;
  for (std::size_t t = 0; t < rows; ++t) {
    for (int k = 0; k < 13; ++k) {
      // Write the row's numbers, scaled so each column has a varied, realistic-length shortest form.
      const double v = values[3 * t + static_cast<std::size_t>(k % 3)] * (1.0 + 0.1 * k) + 1e-3 * k;
      const auto result = std::to_chars(number, number + sizeof number, v);
      buffer.append(number, result.ptr);
      buffer += (k == 12 ? '\n' : ',');
    }
    if (buffer.size() > (1 << 16)) {
      std::fwrite(buffer.data(), 1, buffer.size(), out);
      buffer.clear();
    }
  }
  std::fwrite(buffer.data(), 1, buffer.size(), out);
  std::fclose(out);
  return 0;
}
