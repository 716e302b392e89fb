"""Clients generated from the committed document work against a real server.

* Python: ``openapi-python-client`` (pinned in the test extras) with its default settings
  generates a package from openapi/openapi.json into a temporary directory; the package is
  imported from there and calls every operation that answers JSON on a real gunicorn server
  (127.0.0.1, stopped by pid) with the plain ``Client`` (no token: the server has none), and
  each answer is parsed into the generated models. A second server, configured with a token,
  is called with the generated ``AuthenticatedClient``, and without a token its 401 parses
  into the generated ``Problem``.
* TypeScript: ``openapi-typescript`` and ``typescript`` (pinned below, installed by this test
  with npm into test-artifacts/npm when missing) turn the document into types, and ``tsc
  --noEmit`` type-checks a small program that builds request bodies and reads answers with
  them, and rejects one that sends a value outside an enumeration.

Without node and npm the TypeScript test is skipped, unless REQUIRE_NODE=1 (set by .ci/run),
where it fails. Every external step has a timeout; the only network is the npm registry.
"""

from __future__ import annotations

import importlib
import json
import os
import re
import shutil
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest

from tailgauge.api.operations import OPERATIONS
from tests.system.server import REPO, GunicornServer

DOCUMENT = REPO / "openapi" / "openapi.json"
NPM_DIR = REPO / "test-artifacts" / "npm"
NPM_PACKAGES = {"openapi-typescript": "7.13.0", "typescript": "5.9.3"}
PACKAGE = "tailgauge_client"
TOKEN = "contract-test-token-0123456789"
# The one thing the Python generator cannot use: MessagePack request bodies (the server takes
# them, and the document says so; the generated functions send JSON).
ALLOWED_WARNING = "Unsupported content type application/msgpack"
COMPUTE = [op for op in OPERATIONS if op.request is not None]


def _run(command: list[str], cwd: Path, timeout: float, env: dict | None = None) -> subprocess.CompletedProcess:
    return subprocess.run(
        command, cwd=cwd, env=env, capture_output=True, text=True, timeout=timeout, stdin=subprocess.DEVNULL
    )


def _generator_warnings(output: str) -> list[tuple[str, str]]:
    """(operation, detail) of every warning block the generator printed."""
    found = []
    lines = output.splitlines()
    for index, line in enumerate(lines):
        match = re.match(r"WARNING parsing (\w+ \S+) within", line)
        if match:
            following = [rest.strip() for rest in lines[index + 1 : index + 4] if rest.strip()]
            detail = following[0] if following else ""
            found.append((match[1], detail))
    return found


@pytest.fixture(scope="module")
def python_client(tmp_path_factory) -> Iterator[object]:
    """The generated package, imported from its temporary directory."""
    where = tmp_path_factory.mktemp("python-client")
    env = dict(os.environ, PATH=f"{Path(sys.executable).parent}{os.pathsep}{os.environ.get('PATH', '')}")
    result = _run(
        [sys.executable, "-m", "openapi_python_client", "generate", "--path", str(DOCUMENT), "--output-path",
         str(where / "client")],
        cwd=where, timeout=300, env=env,
    )
    output = result.stdout + result.stderr
    assert result.returncode == 0, output[-4000:]
    warnings = _generator_warnings(output)
    other = [w for w in warnings if w[1] != ALLOWED_WARNING]
    assert not other, f"the generator warned: {other}\n{output[-4000:]}"
    # Exactly the MessagePack alternative of each request body, nothing else.
    assert sorted(op for op, _ in warnings) == sorted(f"POST {op.path}" for op in COMPUTE)
    if "Warning(s) encountered" in output:
        assert warnings, output[-4000:]
    sys.path.insert(0, str(where / "client"))
    try:
        package = importlib.import_module(PACKAGE)
        importlib.import_module(f"{PACKAGE}.models")
        yield package
    finally:
        sys.path.remove(str(where / "client"))
        for name in [n for n in sys.modules if n == PACKAGE or n.startswith(PACKAGE + ".")]:
            del sys.modules[name]


class _TokenServer(GunicornServer):
    def environment(self) -> dict[str, str]:
        environ = super().environment()
        environ["TAILGAUGE_API_TOKENS"] = TOKEN
        return environ


@pytest.fixture(scope="module")
def server() -> Iterator[GunicornServer]:
    with GunicornServer(workers=1) as running:
        yield running


def _operation_module(package, op):
    snake = re.sub(r"(?<!^)(?=[A-Z])", "_", op.operation_id).lower()
    return importlib.import_module(f"{PACKAGE}.api.{op.tag}.{snake}")


def _call(package, op, client, body=None):
    module = _operation_module(package, op)
    if op.request is None:
        return module.sync_detailed(client=client)
    return module.sync_detailed(client=client, body=body)


def _request_model(package, op, payload: dict):
    return getattr(package.models, op.request.__name__).from_dict(payload)


def test_the_python_client_calls_every_operation_and_parses_every_answer(python_client, server):
    models = python_client.models
    client = python_client.Client(base_url=server.base_url, raise_on_unexpected_status=True)
    called = set()
    for op in OPERATIONS:
        if op.response is None:
            continue  # /metrics answers text, not a model
        response = _call(python_client, op, client, _request_model(python_client, op, op.example) if op.request else None)
        assert response.status_code == 200, (op.path, response.content[:500])
        model = getattr(models, op.response.__name__)
        assert isinstance(response.parsed, model), (op.path, type(response.parsed))
        answer = json.loads(response.content)
        # Nothing of the answer is lost or unknown to the generated model.
        assert response.parsed.to_dict() == answer, op.path
        assert not getattr(response.parsed, "additional_properties", {}), op.path
        called.add(op.operation_id)
    assert called == {op.operation_id for op in OPERATIONS if op.response is not None}

    samples = _call(python_client, OPERATIONS[0], client, _request_model(python_client, OPERATIONS[0], OPERATIONS[0].example))
    assert samples.parsed.kind == models.InputKind.SAMPLES
    assert isinstance(samples.parsed.descriptors.mean.value, float)
    assert [q.probability for q in samples.parsed.quantiles] == OPERATIONS[0].example["options"]["probabilities"]

    # options.descriptors: what is not asked for is absent, which the generated model reads as unset.
    op = OPERATIONS[0]
    options = models.SampleOptions(descriptors=[models.DescriptorChoice.MEAN, models.DescriptorChoice.QUANTILES])
    chosen = _call(python_client, op, client, models.SamplesRequest(values=op.example["values"], options=options))
    assert chosen.status_code == 200, chosen.content[:500]
    assert isinstance(chosen.parsed.descriptors.mean.value, float)
    assert not chosen.parsed.descriptors.skewness and not chosen.parsed.moments  # Unset is falsy
    assert chosen.parsed.to_dict() == json.loads(chosen.content)


def test_enum_values_that_differ_only_in_case_are_distinct_members(python_client, server):
    models = python_client.models
    assert models.SkewnessEstimator.G1_PLUG_IN.value == "g1"
    assert models.SkewnessEstimator.G1_ADJUSTED.value == "G1"
    assert models.KurtosisEstimator.G2_ADJUSTED.value == "G2"
    client = python_client.Client(base_url=server.base_url)
    op = OPERATIONS[0]
    skewness = {}
    for member in (models.SkewnessEstimator.G1_PLUG_IN, models.SkewnessEstimator.G1_ADJUSTED):
        options = models.SampleOptions(skewness_estimator=member)
        body = models.SamplesRequest(values=op.example["values"], options=options)
        response = _call(python_client, op, client, body)
        assert response.status_code == 200, response.content[:500]
        skewness[member.value] = response.parsed.descriptors.skewness
    assert skewness["g1"].estimator != skewness["G1"].estimator
    assert skewness["g1"].value != skewness["G1"].value


def test_null_options_from_a_model_mean_the_defaults(python_client, server):
    models = python_client.models
    client = python_client.Client(base_url=server.base_url)
    op = OPERATIONS[0]
    nulled = models.SamplesRequest(values=op.example["values"], options=None)
    assert nulled.to_dict()["options"] is None  # the model sends null, not nothing
    absent = models.SamplesRequest(values=op.example["values"])
    assert "options" not in absent.to_dict()
    answers = [_call(python_client, op, client, body) for body in (nulled, absent)]
    assert [a.status_code for a in answers] == [200, 200]
    assert json.loads(answers[0].content) == json.loads(answers[1].content)


def test_an_answer_with_a_member_added_later_still_parses(python_client, server):
    models = python_client.models
    client = python_client.Client(base_url=server.base_url)
    op = OPERATIONS[0]
    answer = json.loads(_call(python_client, op, client, _request_model(python_client, op, op.example)).content)
    answer["a_member_of_a_later_version"] = {"value": 1}
    answer["descriptors"]["mean"]["a_later_detail"] = 2
    parsed = models.DescriptionResponse.from_dict(answer)
    assert parsed.additional_properties == {"a_member_of_a_later_version": {"value": 1}}
    assert parsed.descriptors.mean.additional_properties == {"a_later_detail": 2}


def test_problems_parse_into_the_generated_problem_model(python_client, server):
    models = python_client.models
    client = python_client.Client(base_url=server.base_url)
    for op in COMPUTE:
        body = _request_model(python_client, op, op.problem_examples[422])
        response = _call(python_client, op, client, body)
        assert response.status_code == 422, (op.path, response.content[:500])
        assert isinstance(response.parsed, models.Problem), op.path
        assert response.parsed.status == 422
        assert response.parsed.errors and response.parsed.errors[0].path.startswith("$")


def test_with_tokens_the_authenticated_client_is_served_and_the_plain_one_gets_a_401(python_client):
    models = python_client.models
    op = OPERATIONS[0]
    with _TokenServer(workers=1) as guarded:
        body = _request_model(python_client, op, op.example)
        plain = _call(python_client, op, python_client.Client(base_url=guarded.base_url), body)
        assert plain.status_code == 401
        assert isinstance(plain.parsed, models.Problem) and plain.parsed.type_.endswith(":unauthorized")
        authenticated = python_client.AuthenticatedClient(base_url=guarded.base_url, token=TOKEN)
        answer = _call(python_client, op, authenticated, body)
        assert answer.status_code == 200
        assert isinstance(answer.parsed, models.DescriptionResponse)
        live = [o for o in OPERATIONS if o.operation_id == "live"][0]
        assert _call(python_client, live, python_client.Client(base_url=guarded.base_url)).status_code == 200


# ---- TypeScript ----

PROGRAM = """\
import type { components, paths } from "./schema";

type Schemas = components["schemas"];
type SamplesAnswer =
  paths["/v1/descriptors/samples"]["post"]["responses"][200]["content"]["application/json"];

// Request bodies: only the required members, defaulted ones left out, null options.
const samples: Schemas["SamplesRequest"] = {
  values: [251.2, 249.8, null],
  options: { probabilities: [0.5], skewness_estimator: "G1", missing: "omit", interval: null },
};
const defaults: Schemas["SamplesRequest"] = { values: [1, 2, 3], options: null };
const table: Schemas["TableRequest"] = { outcomes: [{ value: 0, weight: 3 }], weight_kind: "counts" };
const bins: Schemas["BinsRequest"] = { edges: [0, 10, null], counts: [4, 1] };
const merge: Schemas["MergeRequest"] = {
  states: [{ count: 2, mean: 1.5, central_sums: [0.5, 0, 0.125], minimum: 1, maximum: 2 }],
};
const histogram: Schemas["HistogramRequest"] = {
  layout: "cumulative", upper_bounds: [0.1, 0.3, null], cumulative_counts: [4, 9, 10],
};
const groups: Schemas["GroupsRequest"] = { groups: [{ key: "head-1", values: [1, 2] }, { key: 7, values: [3] }] };
const columns: Schemas["GroupsRequest"] = { values: [1, 2, 3], keys: ["a", "a", 7], options: { baseline: "a" } };
const comparison: Schemas["ComparisonRequest"] = {
  first: { kind: "samples", values: [1, 2, 3] },
  second: { kind: "bins", edges: [0, 1, 2], counts: [1, 1] },
};

// A request that asks only for some descriptors and members.
const chosen: Schemas["SamplesRequest"] = { values: [1, 2, 3], options: { descriptors: ["mean", "quantiles", "spread"] } };

// Answers: members read with their types; what options.descriptors can leave out may be undefined.
declare const answer: SamplesAnswer;
const mean: number | null | undefined = answer.descriptors.mean?.value;
const estimator: string | undefined = answer.descriptors.skewness?.estimator;
const kind: "samples" | "table" | "bins" | "histogram" = answer.kind;
const firstQuantile: number | null | undefined = answer.quantiles?.[0]?.value;
const warningCodes: string[] = answer.warnings.map((w) => w.code);
declare const problem: Schemas["Problem"];
const where: string[] = problem.errors.map((e) => e.path);
declare const compared: Schemas["ComparisonResponse"];
const side: "first" | "second" | "comparison" | undefined = compared.warnings[0]?.side;
const g: number | null = compared.standardized_mean_difference.value;

export const used = [samples, defaults, chosen, table, bins, histogram, groups, columns, merge, comparison, mean,
  estimator, kind,
  firstQuantile, warningCodes, where, side, g];
"""

# Must not type-check: a value outside an enumeration, and a request without its required member.
REJECTED = """\
import type { components } from "./schema";
const wrong: components["schemas"]["SampleOptions"] = { skewness_estimator: "G3" };
const missing: components["schemas"]["SamplesRequest"] = { options: null };
const unknown: components["schemas"]["SampleOptions"] = { descriptors: ["average"] };
export const used = [wrong, missing, unknown];
"""


def _require_node() -> None:
    missing = [tool for tool in ("node", "npm") if shutil.which(tool) is None]
    if not missing:
        return
    message = f"{', '.join(missing)} not found (apt-get install -y --no-install-recommends nodejs npm)"
    if os.environ.get("REQUIRE_NODE") == "1":
        pytest.fail(message)
    pytest.skip(message)


def _npm_tools() -> Path:
    """test-artifacts/npm with the pinned packages installed (npm install when missing or different)."""
    manifest = {"private": True, "dependencies": dict(sorted(NPM_PACKAGES.items()))}
    NPM_DIR.mkdir(parents=True, exist_ok=True)
    package_json = NPM_DIR / "package.json"
    installed = all(
        (NPM_DIR / "node_modules" / name / "package.json").is_file()
        and json.loads((NPM_DIR / "node_modules" / name / "package.json").read_text())["version"] == version
        for name, version in NPM_PACKAGES.items()
    )
    if not installed or not package_json.is_file() or json.loads(package_json.read_text()) != manifest:
        package_json.write_text(json.dumps(manifest, indent=2) + "\n")
        result = _run(["npm", "install", "--no-audit", "--no-fund"], cwd=NPM_DIR, timeout=600)
        assert result.returncode == 0, (result.stdout + result.stderr)[-4000:]
    return NPM_DIR / "node_modules" / ".bin"


@pytest.fixture(scope="module")
def typescript(tmp_path_factory) -> tuple[Path, Path]:
    _require_node()
    tools = _npm_tools()
    where = tmp_path_factory.mktemp("typescript")
    result = _run(
        [str(tools / "openapi-typescript"), str(DOCUMENT), "--output", str(where / "schema.d.ts")],
        cwd=where, timeout=120,
    )
    output = result.stdout + result.stderr
    assert result.returncode == 0, output[-4000:]
    assert not re.search(r"warn|error", output, re.IGNORECASE), output[-4000:]
    return tools, where


def _tsc(tools: Path, where: Path, name: str, source: str) -> subprocess.CompletedProcess:
    (where / name).write_text(source)
    return _run(
        [str(tools / "tsc"), "--noEmit", "--strict", "--target", "es2022", "--module", "esnext",
         "--moduleResolution", "bundler", name],
        cwd=where, timeout=180,
    )


def test_typescript_types_build_requests_and_read_answers(typescript):
    tools, where = typescript
    result = _tsc(tools, where, "program.ts", PROGRAM)
    assert result.returncode == 0, (result.stdout + result.stderr)[-4000:]


def test_typescript_types_reject_what_the_server_rejects(typescript):
    tools, where = typescript
    result = _tsc(tools, where, "rejected.ts", REJECTED)
    output = result.stdout + result.stderr
    assert result.returncode != 0
    assert "rejected.ts(2," in output and "rejected.ts(3," in output and "rejected.ts(4," in output, output[-4000:]
