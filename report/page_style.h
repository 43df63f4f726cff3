// The look shared by chorus's self-contained pages (report.html, the registry history): one
// inline style sheet and a head whose Content-Security-Policy forbids loading anything.
// Thread safety: free functions, reentrant.
#pragma once

#include <string>

namespace chorus {

// "<!DOCTYPE html>...<body><main>": the document up to the start of its content, titled `title`
// (escaped here). The caller closes main, body and html.
std::string PageHead(const std::string& title);

}  // namespace chorus
