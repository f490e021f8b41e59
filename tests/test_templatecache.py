"""ikgen.templatecache: compiled templates kept between runs change nothing in what is rendered,
follow the template's source, never mix environments, and a cache that cannot be used is no error."""

from __future__ import annotations

import tempfile

import jinja2
import pytest

from ikgen.backends import common
from ikgen.templatecache import template_cache


@pytest.fixture()
def private_tmp(tmp_path, monkeypatch):
    """tempfile's folder moved to tmp_path: jinja2 makes its per-user cache folder there."""
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    return tmp_path


def environment(folder, settings: str = "test settings") -> jinja2.Environment:
    return jinja2.Environment(loader=jinja2.FileSystemLoader(str(folder)), trim_blocks=True, keep_trailing_newline=True,
                              bytecode_cache=template_cache(settings))


def test_a_cached_template_renders_the_same_text_and_its_changes_are_seen(private_tmp):
    templates = private_tmp / "templates"
    templates.mkdir()
    (templates / "t.j2").write_text("{% for x in xs %}\n{{ x }};{% endfor %}\n")
    first = environment(templates).get_template("t.j2").render(xs=[1, 2])
    cached = list(private_tmp.glob("_jinja2-cache-*/__ikgen_*.cache"))
    assert len(cached) == 1                                  # compiled once, kept
    assert environment(templates).get_template("t.j2").render(xs=[1, 2]) == first == "1;2;"
    (templates / "t.j2").write_text("{{ xs | length }}\n")   # a changed source is compiled again
    assert environment(templates).get_template("t.j2").render(xs=[1, 2]) == "2\n"


def test_each_environment_setting_has_its_own_cache_files(private_tmp):
    one, other = template_cache("one"), template_cache("other")
    assert one.pattern != other.pattern


def test_the_cache_can_be_turned_off(monkeypatch):
    monkeypatch.setenv("IKGEN_TEMPLATE_CACHE", "off")
    assert template_cache("any") is None


def test_a_cache_that_cannot_be_written_or_read_is_only_a_miss(private_tmp):
    templates = private_tmp / "templates"
    templates.mkdir()
    (templates / "t.j2").write_text("{{ 1 + 1 }}\n")
    env = environment(templates)
    env.bytecode_cache.directory = str(private_tmp / "gone")  # a folder that does not exist
    assert env.get_template("t.j2").render() == "2\n"


def test_a_template_of_ikgen_renders_the_same_compiled_loaded_from_the_cache_and_uncached(private_tmp, monkeypatch):
    folder = common.template_directory()
    context = {"names": {"header": "arm_ik.h", "prefix": "arm_ik"}, "real": "double", "GP": "", "max": 8,
               "dof": 6, "labels": 3}
    compiled = environment(folder, "ikgen templates")
    first = compiled.get_template("c_cffi_glue.c.j2").render(**context)
    assert list(private_tmp.glob("_jinja2-cache-*/__ikgen_*.cache"))
    loaded = environment(folder, "ikgen templates").get_template("c_cffi_glue.c.j2").render(**context)
    monkeypatch.setenv("IKGEN_TEMPLATE_CACHE", "off")
    uncached = environment(folder, "ikgen templates")
    assert uncached.bytecode_cache is None
    assert first == loaded == uncached.get_template("c_cffi_glue.c.j2").render(**context)
    assert "arm_ik_inverse_many" in first
