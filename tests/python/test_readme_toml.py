"""Every TOML block of the README parses with Python's own TOML reader
(tomllib, the standard library's TOML 1.0 parser, outside the project), and
the scenario-language example is a scenario `loadloom validate` accepts."""
import re

import tomllib

from conftest import ROOT, loadloom


def blocks():
    text = (ROOT / "README.md").read_text()
    return [(text[: m.start()].count("\n") + 1, m.group(1)) for m in re.finditer(r"```toml\n(.*?)```", text, re.S)]


def test_every_toml_block_of_the_readme_parses():
    found = blocks()
    assert len(found) >= 5
    for line, body in found:
        try:
            tomllib.loads(body)
        except tomllib.TOMLDecodeError as e:
            raise AssertionError(f"README.md:{line}: the TOML block does not parse: {e}")


def test_the_scenario_language_example_validates(tmp_path):
    scenarios = [b for _, b in blocks() if "[home]" in b and "[[appliance]]" in b]
    assert scenarios, "the README lost its scenario-language example"
    for k, body in enumerate(scenarios):
        p = tmp_path / f"example{k}.toml"
        p.write_text(body)
        loadloom("validate", "--quiet", p)
