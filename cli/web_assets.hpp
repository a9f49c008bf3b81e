#pragma once
// The workbench page's files (web/), compiled into the program at build time by
// cli/embed_web.cmake: nothing is read from the disk or fetched from anywhere at run time.
#include <string_view>

namespace pinchoff::cli {

/// The bytes of web/NAME ("index.html", "workbench.css", "workbench.js"); empty when there
/// is no such file.
std::string_view web_asset(std::string_view name);

}  // namespace pinchoff::cli
