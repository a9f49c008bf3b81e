#include "cli/command_files.hpp"

#include <sys/stat.h>

#include <optional>
#include <system_error>

#include "base/error.hpp"

namespace pinchoff::cli {
namespace fs = std::filesystem;

namespace {

// A file as the system sees it: device and inode when it exists (through every link), else
// its absolute path with the links of the part that exists resolved.
struct identity {
  std::optional<std::pair<dev_t, ino_t>> node;
  fs::path where;
};

identity identify(const fs::path& p) {
  identity id;
  struct stat st {};
  if (::stat(p.c_str(), &st) == 0) id.node = std::make_pair(st.st_dev, st.st_ino);
  std::error_code ec;
  id.where = fs::weakly_canonical(fs::absolute(p, ec), ec);
  if (ec) id.where = fs::absolute(p, ec).lexically_normal();
  return id;
}

bool same(const identity& a, const identity& b) {
  if (a.node && b.node) return *a.node == *b.node;
  return a.where == b.where;
}

std::string named(const named_file& f) { return f.what + " " + quoted_path(f.path); }

}  // namespace

void add_stage_inputs(command_files& files, const fs::path& stage, const fs::path& devices, const std::string& what) {
  files.inputs.push_back({what, stage});
  const std::string reads = "the device-class file " + quoted_path(stage) + " may read";
  std::error_code ec;
  const fs::path beside = stage.parent_path() / "devices.toml";
  if (fs::is_regular_file(beside, ec)) files.inputs.push_back({reads, beside});
  if (!devices.empty()) files.inputs.push_back({reads, devices});
}

void check_command_files(const command_files& files) {
  std::vector<identity> in, out;
  for (const named_file& f : files.inputs) in.push_back(identify(f.path));
  for (std::size_t i = 0; i < files.outputs.size(); ++i) {
    const named_file& o = files.outputs[i];
    if (o.path.empty()) throw io_error(o.what + ": no file given");
    std::error_code ec;
    const fs::path folder = o.path.has_parent_path() ? o.path.parent_path() : fs::path(".");
    if (!o.folder_made && !fs::is_directory(folder, ec))
      throw io_error("cannot write " + named(o) + ": " +
                     (fs::exists(folder, ec) ? quoted_path(folder) + " is not a folder"
                                             : "the folder " + quoted_path(folder) + " does not exist"));
    const std::string leaf = o.path.filename().string();
    if (fs::is_directory(o.path, ec) || leaf.empty() || leaf == "." || leaf == "..")
      throw io_error("cannot write " + named(o) + ": it is a folder");
    out.push_back(identify(o.path));
    for (std::size_t k = 0; k < in.size(); ++k)
      if (same(out.back(), in[k]))
        throw io_error("cannot write " + named(o) + ": it is the input file " + quoted_path(files.inputs[k].path) + " (" +
                       files.inputs[k].what + "); choose another name");
    for (std::size_t k = 0; k < i; ++k)
      if (same(out.back(), out[k]))
        throw io_error("two outputs would both be written to the same file: " + named(files.outputs[k]) + " and " +
                       named(o) + "; choose different names");
    if (!o.may_exist && fs::symlink_status(o.path, ec).type() != fs::file_type::not_found)
      throw file_exists_error("cannot write " + named(o) + ": the file exists");
  }
}

}  // namespace pinchoff::cli
