"""Deployment files: the gunicorn settings, the image, the compose file and the proxy.

Nothing here needs Docker or nginx. The gunicorn settings are loaded in a child process
with a chosen environment (the module reads the environment once, when imported), and
gunicorn's own ``--check-config`` loads them as the image does. The Dockerfile, the
compose file and nginx.conf are read as text and checked against each other and against
the service: the files they name exist, the limits and timeouts agree, and nothing is
published beyond the loopback address.
"""

from __future__ import annotations

import ast
import dataclasses
import fnmatch
import json
import multiprocessing
import os
import re
import shlex
import subprocess
import sys
from dataclasses import dataclass, field
from functools import cache
from pathlib import Path
from typing import Any

import pytest
import yaml

from service.settings import Settings, variable

ROOT = Path(__file__).resolve().parents[2]
DOCKER = ROOT / "docker"
DOCKERFILE = DOCKER / "Dockerfile"
COMPOSE = DOCKER / "compose.yaml"
NGINX_CONF = DOCKER / "nginx.conf"
CONFIG_MODULE = ROOT / "service" / "web" / "gunicorn_config.py"
GUNICORN = Path(sys.executable).parent / "gunicorn"
# A hang-guard only: loading the settings takes well under a second, gunicorn's check
# (which imports the app) a few seconds.
CHILD_SECONDS = 120

# Variables the settings module reads; removed from the child's environment so that
# the developer's own shell cannot change what the tests see.
CONFIG_VARIABLES = (
    "HOST", "PORT", "WEB_CONCURRENCY", "GUNICORN_THREADS", "GUNICORN_TIMEOUT",
    "GUNICORN_GRACEFUL_TIMEOUT", "GUNICORN_MAX_REQUESTS", "PROMETHEUS_MULTIPROC_DIR",
    "GUNICORN_CMD_ARGS", "GUNICORN_ACCESS_LOG",
)

# Loads the settings file as a module and prints what gunicorn would take from it.
LOAD_SETTINGS = """
import importlib.util, json, os, sys
spec = importlib.util.spec_from_file_location("gunicorn_settings", sys.argv[1])
module = importlib.util.module_from_spec(spec)
spec.loader.exec_module(module)
names = ("bind", "workers", "threads", "timeout", "graceful_timeout", "max_requests",
         "max_requests_jitter", "preload_app", "metrics_dir", "worker_class", "logger_class")
values = {name: getattr(module, name) for name in names}
values["exported_metrics_dir"] = os.environ.get("PROMETHEUS_MULTIPROC_DIR")
print(json.dumps(values))
"""


def child_environment(tmp_path: Path, **variables: str) -> dict[str, str]:
    """The test process's environment without the settings' variables, plus ``variables``.

    Temporary folders go under ``tmp_path``, so a default metrics folder made by the
    settings module is cleaned up with the test.
    """
    env = {
        name: value
        for name, value in os.environ.items()
        if name not in CONFIG_VARIABLES and not name.startswith("SAMPLING_")
    }
    env["TMPDIR"] = str(tmp_path)
    env.update(variables)
    return env


def load_settings(env: dict[str, str]) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-c", LOAD_SETTINGS, str(CONFIG_MODULE)],
        cwd=ROOT, env=env, capture_output=True, text=True, timeout=CHILD_SECONDS,
    )


def loaded_settings(env: dict[str, str]) -> dict[str, Any]:
    result = load_settings(env)
    assert result.returncode == 0, result.stderr
    values: dict[str, Any] = json.loads(result.stdout)
    return values


# ---- the gunicorn settings module -------------------------------------------------


def test_every_gunicorn_setting_is_read_from_its_variable(tmp_path: Path) -> None:
    metrics = tmp_path / "metrics"
    metrics.mkdir()
    values = loaded_settings(child_environment(
        tmp_path, HOST="0.0.0.0", PORT="8123", WEB_CONCURRENCY="3",  # noqa: S104
        GUNICORN_THREADS="4", GUNICORN_TIMEOUT="45", GUNICORN_GRACEFUL_TIMEOUT="12",
        GUNICORN_MAX_REQUESTS="500", PROMETHEUS_MULTIPROC_DIR=str(metrics),
    ))
    assert values["bind"] == "0.0.0.0:8123"
    assert (values["workers"], values["threads"]) == (3, 4)
    assert (values["timeout"], values["graceful_timeout"]) == (45, 12)
    # The jitter is a tenth of max_requests, so workers do not all restart together.
    assert (values["max_requests"], values["max_requests_jitter"]) == (500, 50)
    assert values["metrics_dir"] == values["exported_metrics_dir"] == str(metrics)
    assert values["preload_app"] is True


def test_loading_the_settings_imports_neither_flask_nor_the_metrics_client(
    tmp_path: Path,
) -> None:
    # The settings export PROMETHEUS_MULTIPROC_DIR; the Prometheus client reads it once,
    # when first imported, so nothing may import it before (the package's __init__ too).
    probe = ("import sys, service.web.gunicorn_config; "
             "print(sorted({'flask', 'prometheus_client'} & set(sys.modules)))")
    result = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True,
                            text=True, env=child_environment(tmp_path), timeout=CHILD_SECONDS)
    assert result.returncode == 0, result.stderr
    assert result.stdout.strip() == "[]"


def test_gunicorn_defaults(tmp_path: Path) -> None:
    values = loaded_settings(child_environment(tmp_path))
    assert values["bind"] == "127.0.0.1:8000"
    # The documented default: one worker process per core, at most 8.
    assert values["workers"] == min(multiprocessing.cpu_count(), 8)
    assert (values["threads"], values["timeout"], values["graceful_timeout"]) == (128, 30, 30)
    assert values["worker_class"] == "service.web.gunicorn_worker.ServiceWorker"
    assert values["logger_class"] == "service.web.gunicorn_worker.ServiceLogger"
    assert (values["max_requests"], values["max_requests_jitter"]) == (20000, 2000)


def test_without_a_metrics_folder_a_new_one_is_made_and_exported(tmp_path: Path) -> None:
    values = loaded_settings(child_environment(tmp_path))
    made = Path(values["metrics_dir"])
    assert made.is_dir() and made.parent == tmp_path
    assert values["exported_metrics_dir"] == str(made)


@pytest.mark.parametrize(
    ("name", "raw"),
    [("WEB_CONCURRENCY", "lots"), ("GUNICORN_TIMEOUT", "0"),
     ("GUNICORN_MAX_REQUESTS", "-5"), ("PORT", "80.5"), ("GUNICORN_THREADS", "")],
)
def test_a_bad_gunicorn_value_stops_start_up_naming_it(
    tmp_path: Path, name: str, raw: str
) -> None:
    result = load_settings(child_environment(tmp_path, **{name: raw}))
    assert result.returncode == 1
    assert f"{name}={raw!r}" in result.stderr
    assert "Traceback" not in result.stderr


def gunicorn_check(config: str, env: dict[str, str]) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [str(GUNICORN), "--config", config, "--check-config", "service.wsgi:app"],
        cwd=ROOT, env=env, capture_output=True, text=True, timeout=CHILD_SECONDS,
    )


@pytest.mark.parametrize(
    "config", ["image", str(DOCKER / "gunicorn.conf.py")], ids=["image-cmd", "docker-shim"]
)
def test_gunicorn_accepts_the_configuration(tmp_path: Path, config: str) -> None:
    if config == "image":
        config = image_command()[2]
    metrics = tmp_path / "metrics"
    metrics.mkdir()
    result = gunicorn_check(
        config, child_environment(tmp_path, PROMETHEUS_MULTIPROC_DIR=str(metrics))
    )
    assert result.returncode == 0, result.stderr


def test_gunicorn_refuses_a_bad_value_in_the_configuration(tmp_path: Path) -> None:
    metrics = tmp_path / "metrics"
    metrics.mkdir()
    result = gunicorn_check(image_command()[2], child_environment(
        tmp_path, PROMETHEUS_MULTIPROC_DIR=str(metrics), GUNICORN_TIMEOUT="soon"
    ))
    assert result.returncode != 0
    assert "GUNICORN_TIMEOUT='soon'" in result.stderr


# ---- the Dockerfile ---------------------------------------------------------------


@dataclass
class Stage:
    base: str
    name: str | None
    instructions: list[tuple[str, str]] = field(default_factory=list)

    def all(self, keyword: str) -> list[str]:
        return [rest for word, rest in self.instructions if word == keyword]


def dockerfile_instructions(text: str) -> list[tuple[str, str]]:
    """(KEYWORD, rest) per instruction, continuation lines joined, comments dropped."""
    instructions: list[tuple[str, str]] = []
    pending = ""
    for line in text.splitlines():
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        if stripped.endswith("\\"):
            pending += stripped[:-1].strip() + " "
            continue
        keyword, _, rest = (pending + stripped).partition(" ")
        instructions.append((keyword.upper(), rest.strip()))
        pending = ""
    assert not pending, "the Dockerfile ends inside a continued line"
    return instructions


@cache
def stages() -> tuple[Stage, ...]:
    found: list[Stage] = []
    defaults: dict[str, str] = {}
    for keyword, rest in dockerfile_instructions(DOCKERFILE.read_text(encoding="utf-8")):
        if keyword == "ARG" and not found:
            name, _, default = rest.partition("=")
            defaults[name] = default
        elif keyword == "FROM":
            words = rest.split()
            base = re.sub(r"\$\{(\w+)\}", lambda m: defaults[m.group(1)], words[0])
            name = words[2] if len(words) == 3 and words[1].upper() == "AS" else None
            found.append(Stage(base=base, name=name))
        else:
            assert found, f"{keyword} before the first FROM"
            found[-1].instructions.append((keyword, rest))
    return tuple(found)


def final_stage() -> Stage:
    return stages()[-1]


def image_environment() -> dict[str, str]:
    env: dict[str, str] = {}
    for rest in final_stage().all("ENV"):
        for word in shlex.split(rest):
            name, _, value = word.partition("=")
            env[name] = value
    return env


def image_command() -> list[str]:
    commands = final_stage().all("CMD")
    assert len(commands) == 1
    command: list[str] = json.loads(commands[0])
    return command


def copies(stage: Stage) -> list[tuple[str | None, list[str]]]:
    """(the --from stage or None, the sources) of each COPY of ``stage``."""
    found: list[tuple[str | None, list[str]]] = []
    for rest in stage.all("COPY"):
        words = rest.split()
        flags = [w for w in words if w.startswith("--")]
        paths = [w for w in words if not w.startswith("--")]
        origin = next((f.split("=", 1)[1] for f in flags if f.startswith("--from=")), None)
        found.append((origin, paths[:-1]))
    return found


def dockerignore_rules() -> list[tuple[str, bool]]:
    rules = []
    for line in (ROOT / ".dockerignore").read_text(encoding="utf-8").splitlines():
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        negated = line.startswith("!")
        rules.append((line.lstrip("!").strip("/"), negated))
    return rules


def left_out_of_context(path: str) -> bool:
    """Whether .dockerignore keeps ``path`` out of the build context (last rule wins;
    a rule matching a parent folder applies to everything inside it)."""
    parts = Path(path).parts
    candidates = ["/".join(parts[: i + 1]) for i in range(len(parts))]
    excluded = False
    for pattern, negated in dockerignore_rules():
        if any(fnmatch.fnmatchcase(candidate, pattern) for candidate in candidates):
            excluded = not negated
    return excluded


def test_both_stages_start_from_slim_python_3_11() -> None:
    assert len(stages()) == 2
    for stage in stages():
        assert re.fullmatch(r"python:3\.11-slim(-[a-z]+)?(@sha256:[0-9a-f]{64})?", stage.base)


def test_every_copied_file_is_in_the_repository_and_the_build_context() -> None:
    local = [source for stage in stages() for origin, sources in copies(stage)
             if origin is None for source in sources]
    assert local, "no COPY of repository files found"
    for source in local:
        assert (ROOT / source).exists(), f"COPY {source}: no such file in the repository"
        assert not left_out_of_context(source), f"COPY {source}: .dockerignore leaves it out"


def test_every_package_the_project_installs_is_copied_into_the_build() -> None:
    # A package left out would install the console command without its module.
    import tomllib

    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    patterns = project["tool"]["setuptools"]["packages"]["find"]["include"]
    packages = {pattern.rstrip("*") for pattern in patterns}
    build = stages()[0]
    copied = {source.rstrip("/") for origin, sources in copies(build) if origin is None
              for source in sources}
    assert packages <= copied, f"not copied into the build stage: {packages - copied}"


def test_the_build_context_leaves_out_what_the_image_does_not_need() -> None:
    for path in (".venv", ".git", "tests/unit", "bench", ".pytest_cache",
                 "service/__pycache__", "service/sampling/__pycache__/rates.cpython-311.pyc"):
        assert left_out_of_context(path), f"{path} would be sent to the docker build"


def test_the_build_stage_can_compile_the_hypergeometric_tails() -> None:
    # setup.py builds service/sampling/_hypergeometric_tails.c; without setup.py in the
    # build, or a compiler in its stage, the image would quietly run the slower Python tails.
    build = stages()[0]
    copied = {source for origin, sources in copies(build) if origin is None
              for source in sources}
    assert "setup.py" in copied
    assert "service" in copied
    assert any(re.search(r"apt-get install .*\bgcc\b", command) for command in build.all("RUN"))
    assert left_out_of_context("service/sampling/_hypergeometric_tails.cpython-311.so")
    assert not left_out_of_context("service/sampling/_hypergeometric_tails.c")


def test_the_final_stage_takes_only_the_built_environment() -> None:
    names = [stage.name for stage in stages()[:-1]]
    for origin, sources in copies(final_stage()):
        assert origin in names, f"COPY --from={origin}: no earlier stage of that name"
        assert not any("wheel" in source for source in sources)
    for command in final_stage().all("RUN"):
        # No package is built or installed in the image that is shipped.
        assert not re.search(r"apt-get install|pip (install|wheel)|gcc|build-essential",
                             command), command


def test_the_final_stage_runs_as_an_unprivileged_user() -> None:
    users = final_stage().all("USER")
    assert users, "the final stage sets no USER, so it runs as root"
    user = users[-1].split(":")[0]
    assert user not in {"root", "0"}


def test_the_health_check_asks_v1_health_with_python() -> None:
    checks = final_stage().all("HEALTHCHECK")
    assert len(checks) == 1
    command = json.loads(checks[0].split(" CMD ", 1)[1])
    assert command[:2] == ["python", "-c"]
    ast.parse(command[2])  # a probe that does not compile would report every replica dead
    probed = re.search(r"'http://127\.0\.0\.1:' .* '(/[\w/.-]*)'", command[2])
    assert probed is not None, "the probe asks no path of 127.0.0.1"
    assert probed.group(1) == "/v1/health"
    spec = yaml.safe_load((ROOT / "openapi.yaml").read_text(encoding="utf-8"))
    assert "get" in spec["paths"][probed.group(1)]


def test_the_image_environment() -> None:
    env = image_environment()
    assert env["HOST"] == "0.0.0.0"  # noqa: S104 - inside the container, behind the proxy
    assert env["PORT"] == "8000"
    assert env["PYTHONUNBUFFERED"] == "1"
    assert final_stage().all("EXPOSE") == [env["PORT"]]
    # The service refuses a metrics folder that does not exist: the image makes it.
    metrics = env["PROMETHEUS_MULTIPROC_DIR"]
    assert any(metrics in command for command in final_stage().all("RUN"))


def test_the_command_serves_the_wsgi_app_with_the_settings_module() -> None:
    command = image_command()
    assert command[:2] == ["gunicorn", "--config"]
    assert command[2].startswith("python:")
    module = command[2].removeprefix("python:")
    assert (ROOT / (module.replace(".", "/") + ".py")).is_file()
    app_module, _, attribute = command[3].partition(":")
    source = (ROOT / (app_module.replace(".", "/") + ".py")).read_text(encoding="utf-8")
    assigned = {target.id for node in ast.walk(ast.parse(source)) if isinstance(node, ast.Assign)
                for target in node.targets if isinstance(target, ast.Name)}
    assert attribute in assigned


# ---- docker/compose.yaml ----------------------------------------------------------


@cache
def compose() -> dict[str, Any]:
    loaded: dict[str, Any] = yaml.safe_load(COMPOSE.read_text(encoding="utf-8"))
    return loaded


def service_of_image() -> tuple[str, dict[str, Any]]:
    """The compose service built from the Dockerfile: (its name, its definition)."""
    built = [(name, spec) for name, spec in compose()["services"].items() if "build" in spec]
    assert len(built) == 1
    return built[0]


def proxy() -> dict[str, Any]:
    others = [spec for name, spec in compose()["services"].items()
              if name != service_of_image()[0]]
    assert len(others) == 1
    return others[0]


def environment_entries(spec: dict[str, Any]) -> dict[str, str | None]:
    entries = spec.get("environment", [])
    assert isinstance(entries, list), "environment is written as a list"
    parsed: dict[str, str | None] = {}
    for entry in entries:
        name, equals, value = entry.partition("=")
        parsed[name] = value if equals else None
    return parsed


def tmpfs_mounts(spec: dict[str, Any]) -> dict[str, dict[str, str]]:
    mounts: dict[str, dict[str, str]] = {}
    for entry in spec.get("tmpfs", []):
        target, _, options = entry.partition(":")
        mounts[target] = dict(
            option.partition("=")[::2] for option in options.split(",") if option
        )
    return mounts


def test_the_service_runs_two_replicas_and_publishes_no_port() -> None:
    _, service = service_of_image()
    assert service["deploy"]["replicas"] == 2
    assert "ports" not in service
    # A fixed container name would allow only one replica.
    assert "container_name" not in service


def test_the_service_is_built_from_this_repository() -> None:
    _, service = service_of_image()
    assert (COMPOSE.parent / service["build"]["context"]).resolve() == ROOT
    assert (ROOT / service["build"]["dockerfile"]).resolve() == DOCKERFILE


def test_the_proxy_publishes_on_the_loopback_address_only() -> None:
    ports = proxy()["ports"]
    assert ports
    for mapping in ports:
        assert str(mapping).startswith("127.0.0.1:"), mapping
    listened = {d.args[0] for d in nginx_directives("listen", within="server")}
    assert {str(mapping).rsplit(":", 1)[1] for mapping in ports} <= listened


def test_the_proxy_image_is_a_pinned_nginx_release() -> None:
    assert re.fullmatch(r"nginx:1\.\d+(\.\d+)?-alpine", proxy()["image"])


def test_the_proxy_mounts_this_nginx_conf_read_only() -> None:
    volumes = proxy()["volumes"]
    assert len(volumes) == 1
    source, target, mode = volumes[0].split(":")
    assert (COMPOSE.parent / source).resolve() == NGINX_CONF
    assert (target, mode) == ("/etc/nginx/nginx.conf", "ro")


def test_no_variable_is_passed_empty() -> None:
    """An empty value stops start-up (the settings refuse it), so every variable either
    comes from the shell only when set (a bare name) or has a non-empty default."""
    for spec in compose()["services"].values():
        for name, value in environment_entries(spec).items():
            if value is None:
                continue
            default = re.fullmatch(r"\$\{(\w+):-(.*)\}", value)
            assert default is not None, f"{name}={value}: give it a ${{{name}:-default}}"
            assert default.group(1) == name and default.group(2), f"{name}={value}"


def test_every_setting_of_the_service_can_be_passed() -> None:
    _, service = service_of_image()
    passed = environment_entries(service)
    settings = {variable(spec.name) for spec in dataclasses.fields(Settings)}
    assert {name for name in passed if name.startswith("SAMPLING_")} == settings
    for name in ("WEB_CONCURRENCY", "GUNICORN_THREADS", "GUNICORN_TIMEOUT"):
        assert name in passed


def compose_default(name: str) -> int:
    value = environment_entries(service_of_image()[1])[name]
    assert value is not None
    return int(value.removeprefix(f"${{{name}:-").removesuffix("}"))


def test_the_filesystem_is_read_only_but_for_tmpfs_folders_the_user_can_write() -> None:
    _, service = service_of_image()
    assert service["read_only"] is True
    mounts = tmpfs_mounts(service)
    user = final_stage().all("USER")[-1].split(":")[0]
    metrics = mounts[image_environment()["PROMETHEUS_MULTIPROC_DIR"]]
    assert metrics["uid"] == user
    # matplotlib's cache folder, gunicorn's heartbeat files and the uploads are made in
    # /tmp, a volume on disk (an upload may be as large as SAMPLING_MAX_FILE_BYTES), which
    # Docker fills from the image's own /tmp, writable by anyone.
    mpl_parent = str(Path(image_environment()["MPLCONFIGDIR"]).parent)
    volumes = {entry.split(":")[1]: entry.split(":")[0] for entry in service["volumes"]}
    assert volumes[mpl_parent] == "scratch"
    assert mpl_parent not in mounts
    assert "scratch" in compose()["volumes"]


def test_replicas_stop_after_gunicorn_has_let_requests_finish() -> None:
    _, service = service_of_image()
    grace = int(service["stop_grace_period"].removesuffix("s"))
    assert grace > compose_default("GUNICORN_GRACEFUL_TIMEOUT")


def test_health_checks_and_restart_policies() -> None:
    name, service = service_of_image()
    assert final_stage().all("HEALTHCHECK")  # the service's own check comes with the image
    assert proxy()["healthcheck"]["test"][0] == "CMD"
    assert proxy()["depends_on"][name]["condition"] == "service_healthy"
    for spec in (service, proxy()):
        assert spec["restart"] in {"always", "unless-stopped", "on-failure"}
    probe = proxy()["healthcheck"]["test"][-1]
    port = re.search(r"127\.0\.0\.1:(\d+)/", probe)
    assert port is not None
    assert f"127.0.0.1:{port.group(1)}" in {d.args[0] for d in nginx_directives("listen")}


def test_only_the_proxy_reaches_a_network_outside() -> None:
    networks = compose()["networks"]
    _, service = service_of_image()
    assert all(networks[name].get("internal") is True for name in service["networks"])
    assert any(not (networks[name] or {}).get("internal") for name in proxy()["networks"])


# ---- docker/nginx.conf ------------------------------------------------------------


@dataclass
class Directive:
    name: str
    args: list[str]
    path: tuple[str, ...]  # the names of the enclosing blocks, outermost first
    block: list[Directive] | None = None


_TOKEN = re.compile(
    r"\s+|#[^\n]*"              # blanks and comments
    r"|'((?:[^'\\]|\\.)*)'"      # a single-quoted string
    r'|"((?:[^"\\]|\\.)*)"'      # a double-quoted string
    r"|([{};])"                  # punctuation
    r"""|([^\s{};'"#]+)"""       # a plain word
)


def nginx_parse(text: str) -> list[Directive]:
    """nginx's configuration syntax: words, quoted strings, ``;`` and ``{ }`` blocks."""
    root: list[Directive] = []
    stack: list[tuple[list[Directive], tuple[str, ...]]] = [(root, ())]
    words: list[str] = []
    position = 0
    while position < len(text):
        match = _TOKEN.match(text, position)
        assert match is not None, f"nginx.conf: cannot read {text[position:position + 40]!r}"
        position = match.end()
        single, double, punctuation, word = match.groups()
        if punctuation is None:
            if single is not None or double is not None:
                words.append(single if single is not None else double)  # type: ignore[arg-type]
            elif word is not None:
                words.append(word)
            continue
        current, path = stack[-1]
        if punctuation == ";":
            current.append(Directive(words[0], words[1:], path))
        elif punctuation == "{":
            directive = Directive(words[0], words[1:], path, block=[])
            current.append(directive)
            stack.append((directive.block, (*path, words[0])))  # type: ignore[arg-type]
        else:
            stack.pop()
        words = []
    assert len(stack) == 1 and not words, "nginx.conf: unbalanced braces"
    return root


@cache
def nginx_tree() -> tuple[Directive, ...]:
    return tuple(nginx_parse(NGINX_CONF.read_text(encoding="utf-8")))


def walk(directives: list[Directive] | tuple[Directive, ...]) -> list[Directive]:
    found: list[Directive] = []
    for directive in directives:
        found.append(directive)
        if directive.block is not None:
            found.extend(walk(directive.block))
    return found


def nginx_directives(name: str, within: str | None = None) -> list[Directive]:
    return [d for d in walk(nginx_tree()) if d.name == name
            and (within is None or within in d.path)]


def one(name: str) -> Directive:
    found = nginx_directives(name)
    assert len(found) == 1, f"{name}: {len(found)} directives"
    return found[0]


def size_bytes(value: str) -> int:
    units = {"": 1, "k": 1024, "m": 1024**2, "g": 1024**3}
    match = re.fullmatch(r"(\d+)([kmg]?)", value.lower())
    assert match is not None, value
    return int(match.group(1)) * units[match.group(2)]


def seconds(value: str) -> int:
    match = re.fullmatch(r"(\d+)(s?)", value)
    assert match is not None, value
    return int(match.group(1))


def named_location(name: str) -> list[Directive]:
    for directive in nginx_directives("location"):
        if directive.args == [name]:
            assert directive.block is not None
            return directive.block
    raise AssertionError(f"no location {name}")


def map_of(variable_name: str) -> tuple[str, dict[str, str]]:
    """(the source variable, {key: value}) of the ``map`` that defines ``variable_name``."""
    for directive in nginx_directives("map"):
        if directive.args[1] == variable_name:
            assert directive.block is not None
            return directive.args[0], {d.name: d.args[0] for d in directive.block}
    raise AssertionError(f"no map defines {variable_name}")


def test_the_proxy_admits_the_largest_body_the_service_accepts() -> None:
    limit = size_bytes(one("client_max_body_size").args[0])
    assert limit >= Settings().max_list_body_bytes
    # The proxy's own 413 states the limit it enforces.
    body = next(d for d in named_location("@body_too_large") if d.name == "return").args[1]
    assert f"{limit:,} bytes" in body


def test_the_proxy_waits_longer_than_gunicorn_before_giving_up(tmp_path: Path) -> None:
    gunicorn_timeout = loaded_settings(child_environment(tmp_path))["timeout"]
    for name in ("proxy_read_timeout", "proxy_send_timeout"):
        waited = seconds(one(name).args[0])
        assert waited > gunicorn_timeout
        assert waited > compose_default("GUNICORN_TIMEOUT")
    body = next(d for d in named_location("@replica_timeout") if d.name == "return").args[1]
    assert f"{seconds(one('proxy_read_timeout').args[0])} s" in body


def test_the_proxy_does_not_name_its_version() -> None:
    assert one("server_tokens").args == ["off"]


def test_the_access_log_is_one_json_object_per_request() -> None:
    (access_log,) = [d for d in nginx_directives("access_log") if d.args != ["off"]]
    (log_format,) = [d for d in nginx_directives("log_format") if d.args[0] == access_log.args[1]]
    assert log_format.args[1] == "escape=json"
    template = "".join(log_format.args[2:])
    # Each variable becomes a number, which fits quoted and unquoted places alike.
    line = json.loads(re.sub(r"\$\w+", "7", template))
    assert {"time", "method", "path", "status", "request_id", "upstream"} <= set(line)
    assert "$http_authorization" not in template


def test_the_request_id_is_passed_on_or_made() -> None:
    headers = {d.args[0].lower(): d.args[1] for d in nginx_directives("proxy_set_header")}
    source, choices = map_of(headers["x-request-id"])
    assert source == "$http_x_request_id"
    assert choices == {"default": "$http_x_request_id", "": "$request_id"}


def test_forwarded_headers_and_authorization_reach_the_service() -> None:
    headers = {d.args[0].lower(): d.args[1] for d in nginx_directives("proxy_set_header")}
    assert headers["x-forwarded-for"] in {"$remote_addr", "$proxy_add_x_forwarded_for"}
    assert headers["x-forwarded-proto"] == "$scheme"
    assert headers["host"] == "$host"
    # API keys travel in Authorization: nothing may clear or drop client headers.
    assert "authorization" not in headers
    assert not nginx_directives("proxy_pass_request_headers")
    hidden = {d.args[0].lower() for d in nginx_directives("proxy_hide_header")}
    assert "www-authenticate" not in hidden


def test_the_replicas_are_found_through_dockers_dns() -> None:
    assert "127.0.0.11" in one("resolver").args
    (proxy_pass,) = nginx_directives("proxy_pass")
    target = re.fullmatch(r"http://(\$\w+)", proxy_pass.args[0])
    assert target is not None, "a literal host would be resolved only once, at start-up"
    values = [d.args[1] for d in nginx_directives("set") if d.args[0] == target.group(1)]
    name, _ = service_of_image()
    assert values == [f"{name}:{image_environment()['PORT']}"]


def test_the_proxys_own_errors_are_problem_details() -> None:
    pages = nginx_directives("error_page")
    assert {d.args[0] for d in pages} >= {"413", "502", "504"}
    for page in pages:
        location = named_location(page.args[-1])
        types = [d.args[0] for d in location if d.name == "default_type"]
        assert types == ["application/problem+json"]
        (answer,) = [d for d in location if d.name == "return"]
        assert answer.args[0] == page.args[0]
        body = json.loads(answer.args[1].replace("$sampling_request_id", "r-1"))
        assert body["status"] == int(page.args[0])
        assert {"type", "title", "detail", "request_id"} <= set(body)
