// kindling/io/json_keys.hpp: JSON text parsed with its repeated keys noticed. nlohmann-json
// keeps the last of two equal keys in one object and says nothing, so a safetensors
// header, a model plan or a network spec with a key written twice would silently lose
// one; every JSON reader of kindling (and of its tool) parses through here and refuses it.
//
// Needs nlohmann-json (Debian nlohmann-json3-dev).
#ifndef KINDLING_IO_JSON_KEYS_HPP
#define KINDLING_IO_JSON_KEYS_HPP

#include <set>
#include <stdexcept>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

namespace kindling {

/// The first key that appears twice in one object of a JSON text.
struct repeated_json_key {
  std::string key;  // "" when no object repeats a key
  int depth = 0;    // the depth of the object holding it (1: the top-level object)
};

namespace detail {

// Parses `text`, noting in *repeated the first key written twice in one object. Parse
// errors are nlohmann-json's exceptions, for the caller to word.
inline nlohmann::json parse_json_noting_repeats(const std::string& text, repeated_json_key* repeated) {
  std::vector<std::set<std::string>> open;  // the keys of each object being read
  const nlohmann::json::parser_callback_t note = [&](int depth, nlohmann::json::parse_event_t e,
                                                     nlohmann::json& parsed) {
    if (e == nlohmann::json::parse_event_t::object_start) open.emplace_back();
    if (e == nlohmann::json::parse_event_t::object_end && !open.empty()) open.pop_back();
    if (e == nlohmann::json::parse_event_t::key && !open.empty() &&
        !open.back().insert(parsed.get<std::string>()).second && repeated->key.empty()) {
      repeated->key = parsed.get<std::string>();
      repeated->depth = depth;
    }
    return true;
  };
  return nlohmann::json::parse(text, note);
}

}  // namespace detail

/// Parses JSON text, refusing repeated keys: a std::invalid_argument naming `source`
/// for text that is not JSON or that writes a key twice in one object.
inline nlohmann::json parse_json_once(const std::string& text, const std::string& source) {
  repeated_json_key repeated;
  nlohmann::json doc;
  try {
    doc = detail::parse_json_noting_repeats(text, &repeated);
  } catch (const nlohmann::json::exception& e) {
    throw std::invalid_argument(source + ": not valid JSON (" + std::string(e.what()) + ")");
  }
  if (!repeated.key.empty()) {
    throw std::invalid_argument(source + ": key '" + repeated.key +
                                "' appears twice in one object, expected each key once");
  }
  return doc;
}

}  // namespace kindling

#endif  // KINDLING_IO_JSON_KEYS_HPP
