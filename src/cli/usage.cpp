// The --help layout and the usage-error wording of periodfit (cli/usage.hpp).
#include "cli/usage.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdlib>
#include <optional>
#include <set>
#include <string_view>

#include "core/error.hpp"

namespace periodfit::cli {

namespace {

constexpr std::size_t kLabelWidth = 28;  // option column; longer labels put the text on the next line
constexpr std::size_t kLineWidth = 100;

/// Words of `text` filled into lines of at most kLineWidth, every line after the first (and the
/// first too when `first_indent` is false) indented by `indent` spaces.
std::string fill(const std::string& text, std::size_t indent, std::size_t first_used) {
  std::string out;
  std::size_t used = first_used;
  std::size_t i = 0;
  bool line_start = true;
  while (i < text.size()) {
    while (i < text.size() && text[i] == ' ') ++i;
    if (i >= text.size()) break;
    std::size_t j = i;
    while (j < text.size() && text[j] != ' ') ++j;
    const std::size_t word = j - i;
    if (!line_start && used + 1 + word > kLineWidth) {
      out += "\n" + std::string(indent, ' ');
      used = indent;
      line_start = true;
    }
    if (!line_start) {
      out += ' ';
      ++used;
    }
    out.append(text, i, word);
    used += word;
    line_start = false;
    i = j;
  }
  return out;
}

/// The value name without the validator's suffix CLI11 appends (":{a,b}").
std::string value_name(const CLI::Option* opt) {
  std::string t = opt->get_type_name();
  if (!t.empty() && t.back() == '}') {
    const auto cut = t.rfind(":{");
    if (cut != std::string::npos) t.erase(cut);
  }
  return t;
}

bool is_flag(const CLI::Option* opt) { return opt->get_items_expected_max() == 0; }

/// The name an option is known by in messages: its first long name, else short, else positional.
std::string display_name(const CLI::Option* opt) {
  if (!opt->get_lnames().empty()) return "--" + opt->get_lnames().front();
  if (!opt->get_snames().empty()) return "-" + opt->get_snames().front();
  const std::string v = value_name(opt);
  return v.empty() ? opt->get_name(true) : v;
}

std::string option_label(const CLI::Option* opt) {
  if (opt->get_positional() && !opt->nonpositional()) {
    std::string v = display_name(opt);
    if (opt->get_items_expected_max() > 1) v += "…";
    return v;
  }
  std::string out;
  for (const auto& l : opt->get_lnames()) out += (out.empty() ? "--" : ", --") + l;
  for (const auto& s : opt->get_snames()) out += (out.empty() ? "-" : ", -") + s;
  if (!is_flag(opt)) {
    const std::string v = value_name(opt);
    out += " " + (v.empty() ? std::string("VALUE") : v);
  }
  return out;
}

std::string name_list(const std::set<CLI::Option*>& opts) {
  std::vector<std::string> names;
  for (const CLI::Option* o : opts) names.push_back(display_name(o));
  std::sort(names.begin(), names.end());
  std::string out;
  for (std::size_t i = 0; i < names.size(); ++i)
    out += (i == 0 ? "" : i + 1 == names.size() ? " or " : ", ") + names[i];
  return out;
}

std::string row(const std::string& left, const std::string& text, const std::string& notes = {},
                std::size_t width = kLabelWidth) {
  std::string out = "  " + left;
  if (out.size() + 2 > width) {
    out += "\n" + std::string(width, ' ');
  } else {
    out += std::string(width - out.size(), ' ');
  }
  out += fill(text, width, width) + "\n";
  if (!notes.empty()) out += std::string(width, ' ') + fill(notes, width, width) + "\n";
  return out;
}

std::string describe_option(const CLI::Option* opt) {
  std::string text = opt->get_description();
  return text;
}

/// Default and relations of an option, on their own line under its description.
std::string option_notes(const CLI::Option* opt) {
  std::vector<std::string> notes;
  if (!is_flag(opt) && !opt->get_default_str().empty()) notes.push_back("default " + opt->get_default_str());
  if (opt->get_required() && !opt->get_positional()) notes.push_back("must be given");
  if (!opt->get_excludes().empty()) notes.push_back("cannot be combined with " + name_list(opt->get_excludes()));
  if (!opt->get_needs().empty()) notes.push_back("only together with " + name_list(opt->get_needs()));
  std::string text;
  for (std::size_t i = 0; i < notes.size(); ++i) text += (i ? "; " : "") + notes[i];
  return text;
}

class HelpFormatter : public CLI::FormatterBase {
 public:
  std::string make_help(const CLI::App* app, std::string name, CLI::AppFormatMode) const override {
    const auto options = app->get_options();
    const auto commands = app->get_subcommands([](const CLI::App*) { return true; });
    std::string usage = "usage: " + name;
    if (!commands.empty()) usage += " COMMAND";
    for (const CLI::Option* o : options)
      if (o->get_positional() && !o->nonpositional()) {
        const std::string l = option_label(o);
        usage += " " + (o->get_required() ? l : "[" + l + "]");
      }
    usage += " [options]";
    std::string out = usage + "\n\n";
    if (!app->get_description().empty()) out += fill(app->get_description(), 0, 0) + "\n\n";
    if (!commands.empty()) {
      out += "commands:\n";
      std::size_t width = 0;  // command names are short: their column is as wide as the longest
      for (const CLI::App* c : commands) width = std::max(width, c->get_name().size() + 4);
      for (const CLI::App* c : commands) out += row(c->get_name(), c->get_description(), {}, width);
      out += "\n" + fill("`" + name + " COMMAND --help` lists a command's options.", 0, 0) + "\n\n";
    }
    bool any_positional = false;
    for (const CLI::Option* o : options)
      if (o->get_positional() && !o->nonpositional()) {
        if (!any_positional) out += "arguments:\n";
        any_positional = true;
        out += row(option_label(o), describe_option(o), option_notes(o));
      }
    if (any_positional) out += "\n";
    // Groups in the order their first option was declared; an empty group name hides an option.
    std::vector<std::string> groups;
    for (const CLI::Option* o : options)
      if (o->nonpositional() && !o->get_group().empty() &&
          std::find(groups.begin(), groups.end(), o->get_group()) == groups.end())
        groups.push_back(o->get_group());
    // A command that names its groups (predict: system, input, output) lists them first and the
    // rest (--help at least) after them.
    const auto general = std::find(groups.begin(), groups.end(), std::string("Options"));
    if (general != groups.end() && groups.size() > 1) std::rotate(general, general + 1, groups.end());
    for (const auto& g : groups) {
      std::string heading = g;
      if (heading == "Options") heading = groups.size() > 1 ? "other options" : "options";  // the parser's default group
      out += heading + ":\n";
      for (const CLI::Option* o : options)
        if (o->nonpositional() && o->get_group() == g) out += row(option_label(o), describe_option(o), option_notes(o));
      out += "\n";
    }
    if (!app->get_footer().empty()) out += fill(app->get_footer(), 0, 0) + "\n";
    return out;
  }
};

// --- usage errors ---------------------------------------------------------------------------

bool starts_with(std::string_view s, std::string_view p) { return s.substr(0, p.size()) == p; }
bool ends_with(std::string_view s, std::string_view p) {
  return s.size() >= p.size() && s.substr(s.size() - p.size()) == p;
}

/// The command named on the command line (the first word that is one), or nullptr.
CLI::App* chosen_command(CLI::App& app, const std::vector<std::string>& args) {
  for (const auto& a : args) {
    if (a == "--") break;
    if (!a.empty() && a[0] == '-') continue;
    for (CLI::App* c : app.get_subcommands([](CLI::App*) { return true; }))
      if (c->get_name() == a) return c;
  }
  return nullptr;
}

std::string command_list(CLI::App& app) {
  std::string out;
  for (const CLI::App* c : app.get_subcommands([](CLI::App*) { return true; }))
    out += (out.empty() ? "" : ", ") + c->get_name();
  return out;
}

const CLI::Option* find_option(const CLI::App& app, const std::string& name) {
  for (const CLI::Option* o : app.get_options()) {
    if (display_name(o) == name || o->get_name() == name || o->get_name(true) == name) return o;
    for (const auto& l : o->get_lnames())
      if ("--" + l == name) return o;
    for (const auto& s : o->get_snames())
      if ("-" + s == name) return o;
  }
  return nullptr;
}

std::vector<std::string> option_names(const CLI::App& app) {
  std::vector<std::string> names;
  for (const CLI::Option* o : app.get_options()) {
    for (const auto& l : o->get_lnames()) names.push_back("--" + l);
    for (const auto& s : o->get_snames()) names.push_back("-" + s);
  }
  return names;
}

/// `name` as the option is known (its first long name), for messages naming a CLI11 name.
std::string known_as(const CLI::App& scope, const std::string& name) {
  const CLI::Option* o = find_option(scope, name);
  return o ? display_name(o) : name;
}

bool is_number(const std::string& text) {
  double v = 0;
  const char* end = text.data() + text.size();
  const auto [ptr, ec] = std::from_chars(text.data(), end, v);
  return ec == std::errc{} && ptr == end && !text.empty();
}

std::string relation(const std::string& message, const std::string& word, const std::string& plain,
                     const CLI::App& scope) {
  const auto at = message.find(word);
  if (at == std::string::npos) return message;
  const std::string a = message.substr(0, at), b = message.substr(at + word.size());
  return known_as(scope, a) + plain + known_as(scope, b);
}

std::string extras_message(CLI::App& app, CLI::App* command, const std::vector<std::string>& extras) {
  const std::string word = extras.empty() ? std::string() : extras.front();
  const CLI::App& scope = command ? *command : app;
  if (!word.empty() && word[0] == '-') {
    const std::string name = word.substr(0, word.find('='));
    std::string out = "unknown option " + name;
    // Options that were removed name their replacement (issue 14: the system is an expression).
    if ((name == "--num" || name == "--den") && find_option(scope, "--system"))
      return out + "; did you mean --system? (H(s) as an expression in s, e.g. --system \"1/(1 + 1e-3*s)\")";
    if (const std::string near = nearest_name(name, option_names(scope)); !near.empty())
      return out + "; did you mean " + near + "?";
    return out + " (" + (command ? "periodfit " + command->get_name() + " --help" : std::string("periodfit --help")) +
           " lists the options)";
  }
  if (!command) {
    std::vector<std::string> names;
    for (const CLI::App* c : app.get_subcommands([](CLI::App*) { return true; })) names.push_back(c->get_name());
    std::string out = "unknown command \"" + word + "\"";
    if (const std::string near = nearest_name(word, names); !near.empty()) out += "; did you mean " + near + "?";
    return out + " (commands: " + command_list(app) + ")";
  }
  return "unexpected argument \"" + word + "\" (periodfit " + command->get_name() + " takes no more arguments)";
}

/// A required option or command missing: a word where the command belongs is a misspelt
/// command, not a missing one; a missing option is named with what it is for.
std::optional<std::string> required_message(const std::string& message, CLI::App& app, const CLI::App* command,
                                            const CLI::App& scope, const std::vector<std::string>& args) {
  if (starts_with(message, "A subcommand")) {
    for (const auto& a : args)
      if (!a.empty() && (a[0] != '-' || !find_option(app, a.substr(0, a.find('=')))))
        return extras_message(app, nullptr, {a});
    return "no command given; commands: " + command_list(app);
  }
  if (!ends_with(message, " is required")) return std::nullopt;
  const std::string name = message.substr(0, message.size() - std::string_view(" is required").size());
  const CLI::Option* o = find_option(scope, name);
  const std::string who = command ? "periodfit " + command->get_name() : std::string("periodfit");
  if (o) return who + " needs " + option_label(o) + ": " + o->get_description();
  return who + " needs " + name;
}

/// A value that does not convert: not a number, not a whole number, or a value given to a switch.
std::optional<std::string> conversion_message(const std::string& message, const CLI::App& scope) {
  if (starts_with(message, "Could not convert: ")) {
    const std::string rest = message.substr(std::string_view("Could not convert: ").size());
    const auto eq = rest.find(" = ");
    if (eq != std::string::npos) {
      const std::string name = known_as(scope, rest.substr(0, eq)), value = rest.substr(eq + 3);
      // A value that is a number but was refused wanted a whole number (a count).
      return name + ": \"" + value + "\" is not " + (is_number(value) ? "a whole number" : "a number");
    }
  }
  const auto colon = message.find(": ");
  if (colon != std::string::npos && message.find("too many inputs for a flag") != std::string::npos)
    return known_as(scope, message.substr(0, colon)) + " is a switch and takes no value";
  return std::nullopt;
}

/// A refused value: CLI11's IsMember says `VALUE not in {a,b}`, said here with the choices and
/// the nearest one; the project's own checks already speak our way.
std::string validation_message(const std::string& message, const CLI::App& scope) {
  const auto colon = message.find(": ");
  const auto not_in = message.find(" not in {");
  if (colon == std::string::npos || not_in == std::string::npos || not_in <= colon || message.back() != '}')
    return message;
  const std::string name = known_as(scope, message.substr(0, colon));
  const std::string value = message.substr(colon + 2, not_in - colon - 2);
  const std::string set = message.substr(not_in + 9, message.size() - not_in - 10);
  std::vector<std::string> choices;
  std::string listed;
  for (std::size_t i = 0; i <= set.size();) {
    const auto comma = std::min(set.find(',', i), set.size());
    choices.push_back(set.substr(i, comma - i));
    listed += (listed.empty() ? "" : ", ") + choices.back();
    i = comma + 1;
  }
  std::string out = name + ": \"" + value + "\" is not one of " + listed;
  if (const std::string near = nearest_name(value, choices); !near.empty()) out += "; did you mean " + near + "?";
  return out;
}

/// An option without its value. Messages name the option first (`--rate: 1 required HZ
/// missing`) or after "to ".
std::optional<std::string> mismatch_message(const std::string& message, const CLI::App& scope) {
  const auto dash = message.find("--");
  if (dash == std::string::npos) return std::nullopt;
  const auto end = message.find_first_of(": ,", dash);
  const std::string name = message.substr(dash, end == std::string::npos ? std::string::npos : end - dash);
  if (name.empty()) return std::nullopt;
  const CLI::Option* o = find_option(scope, name);
  const std::string v = o ? value_name(o) : std::string();
  return (o ? display_name(o) : name) + " needs a value" + (v.empty() ? std::string() : " (" + v + ")");
}

}  // namespace

std::shared_ptr<CLI::FormatterBase> make_help_formatter() { return std::make_shared<HelpFormatter>(); }

std::string usage_error_message(const CLI::ParseError& error, CLI::App& app, const std::vector<std::string>& args) {
  std::string message = error.what();
  while (!message.empty() && (message.back() == '\n' || message.back() == '.')) message.pop_back();
  CLI::App* command = chosen_command(app, args);
  const CLI::App& scope = command ? *command : app;

  std::optional<std::string> said;
  if (dynamic_cast<const CLI::RequiredError*>(&error)) said = required_message(message, app, command, scope, args);
  if (dynamic_cast<const CLI::ExcludesError*>(&error)) return relation(message, " excludes ", " cannot be combined with ", scope);
  if (dynamic_cast<const CLI::RequiresError*>(&error))
    return relation(message, " requires ", " only applies together with ", scope);
  if (dynamic_cast<const CLI::ConversionError*>(&error)) said = conversion_message(message, scope);
  if (dynamic_cast<const CLI::ValidationError*>(&error)) return validation_message(message, scope);
  if (dynamic_cast<const CLI::ExtrasError*>(&error)) {
    std::vector<std::string> extras = command ? command->remaining() : app.remaining();
    if (extras.empty()) extras = app.remaining(true);
    return extras_message(app, command, extras);
  }
  if (dynamic_cast<const CLI::ArgumentMismatch*>(&error)) said = mismatch_message(message, scope);
  if (said) return *said;
  // Anything else: the parser's words, lower-cased at the start, on one line.
  for (auto& c : message)
    if (c == '\n') c = ' ';
  if (!message.empty() && message[0] >= 'A' && message[0] <= 'Z') message[0] = static_cast<char>(message[0] - 'A' + 'a');
  return message;
}

}  // namespace periodfit::cli
