#pragma once
// A small strict XML 1.0 well-formedness checker that also returns the elements, for tests of the
// HTML pages statewise writes as XHTML. It accepts what those pages use: an optional XML declaration,
// a DOCTYPE without an internal subset, comments, elements with quoted attributes, text, the five
// predefined entities and numeric character references. Anything else — an unclosed or mismatched
// tag, a duplicate attribute, a bare '<' or '&', an undeclared entity such as &nbsp;, text after the
// root element — is an error with its byte offset. (W3C, Extensible Markup Language (XML) 1.0, fifth
// edition, 2008, sections 2.1, 2.3, 2.4, 3.1 and 4.1 are the rules followed.)

#include <cstddef>
#include <map>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

namespace statewise::testing {

struct XmlElement {
  std::string name;
  std::map<std::string, std::string> attributes;  // values with references resolved
  int parent = -1;                                // index in the element list, -1 for the root
  std::string text;                               // character data directly inside, concatenated
};

class XmlChecker {
 public:
  // Parses `text`; throws std::runtime_error("offset N: ...") when it is not well-formed XML.
  static std::vector<XmlElement> parse(std::string_view text) {
    XmlChecker checker(text);
    checker.document();
    return checker.elements_;
  }

 private:
  explicit XmlChecker(std::string_view text) : text_(text) {}

  [[noreturn]] void fail(const std::string& what) const {
    throw std::runtime_error("offset " + std::to_string(at_) + ": " + what);
  }
  bool starts(std::string_view prefix) const { return text_.substr(at_, prefix.size()) == prefix; }
  void expect(std::string_view prefix) {
    if (!starts(prefix)) fail("expected \"" + std::string(prefix) + "\"");
    at_ += prefix.size();
  }
  static bool is_space(char c) { return c == ' ' || c == '\t' || c == '\n' || c == '\r'; }
  void skip_space() {
    while (at_ < text_.size() && is_space(text_[at_])) ++at_;
  }
  static bool is_name_char(char c, bool first) {
    const auto u = static_cast<unsigned char>(c);
    if ((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_' || c == ':' || u >= 0x80) return true;
    return !first && ((c >= '0' && c <= '9') || c == '-' || c == '.');
  }
  std::string name() {
    const std::size_t start = at_;
    if (at_ >= text_.size() || !is_name_char(text_[at_], true)) fail("expected a name");
    while (at_ < text_.size() && is_name_char(text_[at_], false)) ++at_;
    return std::string(text_.substr(start, at_ - start));
  }
  // A reference after '&': the five predefined entities or a numeric character reference.
  std::string reference() {
    expect("&");
    const std::size_t end = text_.find(';', at_);
    if (end == std::string_view::npos || end - at_ > 10) fail("unterminated reference");
    const std::string body(text_.substr(at_, end - at_));
    at_ = end + 1;
    if (body == "amp") return "&";
    if (body == "lt") return "<";
    if (body == "gt") return ">";
    if (body == "quot") return "\"";
    if (body == "apos") return "'";
    if (body.size() > 1 && body[0] == '#') {
      const bool hex = body[1] == 'x';
      const std::string digits = body.substr(hex ? 2 : 1);
      if (digits.empty() ||
          digits.find_first_not_of(hex ? "0123456789abcdefABCDEF" : "0123456789") != std::string::npos)
        fail("bad character reference &" + body + ";");
      const unsigned long code = std::stoul(digits, nullptr, hex ? 16 : 10);
      if (code == 0 || code > 0x10FFFF) fail("character reference out of range");
      return encode(code);
    }
    fail("undeclared entity &" + body + ";");
  }
  static std::string encode(unsigned long code) {
    std::string out;
    if (code < 0x80) {
      out += static_cast<char>(code);
    } else if (code < 0x800) {
      out += static_cast<char>(0xC0 | (code >> 6));
      out += static_cast<char>(0x80 | (code & 0x3F));
    } else if (code < 0x10000) {
      out += static_cast<char>(0xE0 | (code >> 12));
      out += static_cast<char>(0x80 | ((code >> 6) & 0x3F));
      out += static_cast<char>(0x80 | (code & 0x3F));
    } else {
      out += static_cast<char>(0xF0 | (code >> 18));
      out += static_cast<char>(0x80 | ((code >> 12) & 0x3F));
      out += static_cast<char>(0x80 | ((code >> 6) & 0x3F));
      out += static_cast<char>(0x80 | (code & 0x3F));
    }
    return out;
  }
  void comment() {
    expect("<!--");
    const std::size_t end = text_.find("--", at_);
    if (end == std::string_view::npos || text_.substr(end, 3) != "-->")
      fail("bad comment ('--' inside or unterminated)");
    at_ = end + 3;
  }
  void misc() {
    for (;;) {
      skip_space();
      if (starts("<!--"))
        comment();
      else
        return;
    }
  }
  void document() {
    if (starts("<?xml")) {
      const std::size_t end = text_.find("?>", at_);
      if (end == std::string_view::npos) fail("unterminated XML declaration");
      at_ = end + 2;
    }
    misc();
    if (starts("<!DOCTYPE")) {
      at_ += 9;
      if (at_ >= text_.size() || !is_space(text_[at_])) fail("expected a space after <!DOCTYPE");
      skip_space();
      name();
      skip_space();
      if (at_ >= text_.size() || text_[at_] != '>')
        fail("DOCTYPE with an external or internal subset is not supported");
      ++at_;
    }
    misc();
    if (!starts("<")) fail("expected the root element");
    element(-1);
    misc();
    if (at_ != text_.size()) fail("content after the root element");
  }
  void element(int parent) {
    expect("<");
    XmlElement e;
    e.name = name();
    e.parent = parent;
    for (;;) {
      const bool spaced = at_ < text_.size() && is_space(text_[at_]);
      skip_space();
      if (at_ >= text_.size()) fail("unterminated start tag <" + e.name + ">");
      if (text_[at_] == '>' || starts("/>")) break;
      if (!spaced) fail("expected a space before an attribute in <" + e.name + ">");
      const std::string attribute = name();
      skip_space();
      expect("=");
      skip_space();
      if (at_ >= text_.size() || (text_[at_] != '"' && text_[at_] != '\''))
        fail("attribute value not quoted");
      const char quote = text_[at_++];
      std::string value;
      while (at_ < text_.size() && text_[at_] != quote) {
        if (text_[at_] == '<') fail("'<' in an attribute value");
        if (text_[at_] == '&')
          value += reference();
        else
          value += text_[at_++];
      }
      if (at_ >= text_.size()) fail("unterminated attribute value");
      ++at_;
      if (!e.attributes.emplace(attribute, value).second) fail("attribute " + attribute + " given twice");
    }
    const int index = static_cast<int>(elements_.size());
    elements_.push_back(e);
    if (starts("/>")) {
      at_ += 2;
      return;
    }
    ++at_;  // '>'
    for (;;) {
      if (at_ >= text_.size()) fail("element <" + e.name + "> not closed");
      if (starts("</")) {
        at_ += 2;
        const std::string closing = name();
        if (closing != e.name) fail("</" + closing + "> closes <" + e.name + ">");
        skip_space();
        expect(">");
        return;
      }
      if (starts("<!--")) {
        comment();
      } else if (starts("<![CDATA[") || starts("<?") || starts("<!")) {
        fail("unsupported markup");
      } else if (text_[at_] == '<') {
        element(index);
      } else if (text_[at_] == '&') {
        elements_[static_cast<std::size_t>(index)].text += reference();
      } else {
        if (starts("]]>")) fail("']]>' in text");
        elements_[static_cast<std::size_t>(index)].text += text_[at_++];
      }
    }
  }

  std::string_view text_;
  std::size_t at_ = 0;
  std::vector<XmlElement> elements_;
};

}  // namespace statewise::testing
