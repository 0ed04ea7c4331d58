// The physics note and its citations: every place in lphi's sources that
// cites the physics note names analysis/PHYSICS.md, and every section title
// it quotes is a heading of the note. A consistency check of the repository
// (like deploy/check-layering), not a physics check: the physics of each
// section is tested against its published sources by the other tests here.
#include <gtest/gtest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <regex>
#include <set>
#include <sstream>
#include <string>
#include <vector>

namespace {

namespace fs = std::filesystem;

std::string read_file(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

// The titles of the note's "## " sections.
std::set<std::string> section_titles(const std::string& note) {
  std::set<std::string> titles;
  std::istringstream in(note);
  for (std::string line; std::getline(in, line);)
    if (line.rfind("## ", 0) == 0) titles.insert(line.substr(3));
  return titles;
}

// The text after a citation as one line: comment markers at line starts
// removed and runs of blanks collapsed, so that a title broken across
// comment lines reads as written.
std::string flattened(const std::string& text) {
  std::string out;
  bool blank = false;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);) {
    const std::size_t start = line.find_first_not_of(" \t");
    if (start == std::string::npos) continue;
    line = line.substr(start);
    if (line.rfind("//", 0) == 0) line = line.substr(2);
    else if (line.rfind("#", 0) == 0) line = line.substr(1);
    for (char c : " " + line) {
      const bool is_blank = c == ' ' || c == '\t';
      if (is_blank && blank) continue;
      out += is_blank ? ' ' : c;
      blank = is_blank;
    }
  }
  return out;
}

struct Citation {
  std::string where;
  bool names_the_file = false;  // "analysis/PHYSICS.md", not a bare "PHYSICS.md"
  std::string title;            // the quoted section title, if any
};

std::vector<Citation> citations(const fs::path& root) {
  std::vector<Citation> found;
  const std::set<std::string> kinds = {".cpp", ".hpp", ".in", ".py", ".md", ".toml", ".txt"};
  // A title follows the file name after an optional comma and parenthesis.
  const std::regex quoted(R"(^,? ?\(?"([^"]+)\")");
  for (auto it = fs::recursive_directory_iterator(root); it != fs::recursive_directory_iterator();
       ++it) {
    const fs::path& p = it->path();
    const std::string name = p.filename().string();
    if (it->is_directory() && (name.rfind("build", 0) == 0 || name.rfind(".", 0) == 0)) {
      it.disable_recursion_pending();
      continue;
    }
    if (!it->is_regular_file() || kinds.count(p.extension().string()) == 0) continue;
    const std::string rel = fs::relative(p, root).generic_string();
    // The note itself, and this file, whose code spells the name out.
    if (rel == "analysis/PHYSICS.md" || rel == "tests/analysis/models/physics_note_test.cpp")
      continue;
    const std::string text = read_file(p);
    for (std::size_t at = text.find("PHYSICS.md"); at != std::string::npos;
         at = text.find("PHYSICS.md", at + 1)) {
      Citation c;
      const auto newlines = std::count(text.begin(), text.begin() + static_cast<long>(at), '\n');
      c.where = rel + ":" + std::to_string(newlines + 1);
      c.names_the_file = at >= 9 && text.compare(at - 9, 9, "analysis/") == 0;
      std::smatch m;
      const std::string after = flattened(text.substr(at + 10, 200)).substr(1);
      if (std::regex_search(after, m, quoted)) c.title = m[1];
      found.push_back(c);
    }
  }
  return found;
}

TEST(PhysicsNote, EveryCitationNamesTheNoteAndAnExistingSection) {
  const fs::path root = LPHI_SOURCE_DIR;
  const std::set<std::string> titles = section_titles(read_file(root / "analysis/PHYSICS.md"));
  // The note's sections as DEVELOPERS.md lists them (analysis/PHYSICS.md,
  // "Constants and units" ... "Digamma check values").
  ASSERT_GE(titles.size(), 13u);
  ASSERT_EQ(titles.count("2D weak localization (HLN)"), 1u);

  const std::vector<Citation> all = citations(root);
  // Comments in analysis/, drivers/sim and tests cite the note; finding none
  // means the scan itself is broken.
  ASSERT_GE(all.size(), 30u);
  std::size_t with_title = 0;
  for (const Citation& c : all) {
    EXPECT_TRUE(c.names_the_file) << c.where << ": cite analysis/PHYSICS.md by its path";
    if (c.title.empty()) continue;
    ++with_title;
    EXPECT_EQ(titles.count(c.title), 1u)
        << c.where << ": \"" << c.title << "\" is not a section of analysis/PHYSICS.md";
  }
  EXPECT_GE(with_title, 20u);
}

}  // namespace
