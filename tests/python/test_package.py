"""The Python package (src/python/jeansgrow) against the program.

Run by CTest with Debian's pytest under /usr/bin/python3; the environment
gives the library (JEANSGROW_LIBRARY), the program (JEANSGROW_PROGRAM) and
PYTHONPATH=src/python. The program's tables are the reference: the package
must give the same numbers, to every written digit, in-process.
"""
import os
import subprocess
import threading

import numpy
import pytest

import jeansgrow

SOURCE = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PROGRAM = os.environ["JEANSGROW_PROGRAM"]
REFERENCE = os.path.join(SOURCE, "params", "reference.cfg")
DEMO = os.path.join(SOURCE, "params", "demo_baryon_rich.cfg")
BAD = os.path.join(SOURCE, "tests", "bad")

# Two cosmologies, the second in h units with another sound-speed model, a
# short redshift list and few wavenumbers, so that every table is quick.
COSMOLOGIES = [
    (REFERENCE, {"output.redshifts": [1000.0, 200.0, 20.0], "perturbations.k_count": 16}),
    (DEMO, {"output.units": "Mpc/h", "perturbations.sound_speed": "isothermal",
            "perturbations.k_count": 12, "output.history_rows": 300}),
]


def program(*args, output=None):
    """Run the program; its table read back with read_table."""
    subprocess.run([PROGRAM, *args, "-o", output], check=True, capture_output=True)
    return jeansgrow.read_table(output)


def set_args(values):
    args = []
    for text in jeansgrow._overrides(values):
        args += ["--set", text]
    return args


def assert_same_table(got, expected):
    if isinstance(expected, jeansgrow.Epochs):
        assert dict(got) == dict(expected) and got.absent == expected.absent
        assert got.units == expected.units
    else:
        assert got.columns == expected.columns
        assert got.shape == expected.shape
        for c in expected.columns:  # exact: the same written digits
            numpy.testing.assert_array_equal(got[c], expected[c], err_msg=c)
    assert got.params == expected.params
    assert got.conventions == expected.conventions and got.title == expected.title


@pytest.mark.parametrize("what", jeansgrow.TABLES)
@pytest.mark.parametrize("cosmology", range(len(COSMOLOGIES)))
def test_compute_equals_the_programs_table(what, cosmology, tmp_path):
    path, overrides = COSMOLOGIES[cosmology]
    expected = program(what, path, *set_args(overrides), output=str(tmp_path / "t.txt"))
    got = jeansgrow.compute(what, path, set=overrides)
    assert_same_table(got, expected)
    # The --set texts themselves give the same.
    assert_same_table(jeansgrow.compute(what, path, set=jeansgrow._overrides(overrides)),
                      expected)


def test_read_table_round_trips_every_table_kind(tmp_path):
    """Each table the program writes, read back: the columns are those of
    the header's last line, the numbers those numpy.loadtxt reads, and the
    header's effective parameters rebuild the same table."""
    subprocess.run([PROGRAM, "run", REFERENCE, "--set", "perturbations.k_count=8",
                    "-o", str(tmp_path / "run")], check=True, capture_output=True)
    subprocess.run([PROGRAM, "scan", REFERENCE, "--vary", "cosmology.hubble_h=0.6:0.7:2",
                    "--set", "output.redshifts=[100.0, 20.0]", "--threads", "2", "--part", "1/2",
                    "-o", str(tmp_path / "slice1.txt")], check=True, capture_output=True)
    subprocess.run([PROGRAM, "scan", REFERENCE, "--vary", "cosmology.hubble_h=0.6:0.7:2",
                    "--set", "output.redshifts=[100.0, 20.0]", "--threads", "2", "--part", "2/2",
                    "-o", str(tmp_path / "slice2.txt")], check=True, capture_output=True)
    subprocess.run([PROGRAM, "merge", str(tmp_path / "scan.txt"), str(tmp_path / "slice1.txt"),
                    str(tmp_path / "slice2.txt")], check=True, capture_output=True)
    kinds = {name: tmp_path / "run" / (name + ".txt") for name in jeansgrow.TABLES}
    kinds["scan slice"] = tmp_path / "slice1.txt"
    kinds["scan"] = tmp_path / "scan.txt"
    for kind, path in kinds.items():
        t = jeansgrow.read_table(path)
        lines = path.read_text().splitlines()
        header = [l for l in lines if l.startswith("#")]
        if kind == "epochs":
            rows = numpy.loadtxt(path, dtype=str, delimiter="\t")
            assert {r[0]: float(r[1]) for r in rows} == dict(t)
            assert {r[0]: r[2] for r in rows} == t.units
        else:
            assert t.columns == header[-1][2:].split("\t"), kind
            data = numpy.loadtxt(path, ndmin=2)
            assert data.shape == (len(t), len(t.columns)), kind
            for i, c in enumerate(t.columns):
                numpy.testing.assert_array_equal(t[c], data[:, i], err_msg=kind)
        keys = [l[2:].split(" = ")[0] for l in header if " = " in l and l.endswith(";")]
        assert sorted(t.params) == sorted(keys), kind
        if kind in jeansgrow.TABLES:
            again = jeansgrow.compute(kind, jeansgrow.Parameters(set=t.params))
            assert_same_table(again, t)


def test_absent_epochs_are_read_with_their_reasons(tmp_path):
    # Omega_b h^2 = 1e-5: the optical depth never reaches 1 (as in test_epochs.c).
    t = program("epochs", REFERENCE, "--set", "cosmology.baryon_density_h2=1e-05",
                output=str(tmp_path / "e.txt"))
    assert "z_star" in t.absent and "z_star" not in t
    with pytest.raises(KeyError, match="z_star: none"):
        t["z_star"]
    assert_same_table(jeansgrow.compute("epochs", REFERENCE,
                                        set={"cosmology.baryon_density_h2": 1e-05}), t)


def bad_cases():
    """The bad-input catalogue cases that a Python caller can make: a table
    command on a parameter file with --set overrides (no other options)."""
    cases = []
    for name in sorted(os.listdir(BAD)):
        if not name.endswith(".expect"):
            continue
        case = name[:-7]
        cfg = os.path.join(BAD, case + ".cfg")
        args_path = os.path.join(BAD, case + ".args")
        if os.path.exists(args_path):
            with open(args_path) as f:
                args = f.read().split("\n")
            if args and args[-1] == "":
                args.pop()
        else:
            args = ["history", "-o", "@OUT@", "@CFG@"]
        args = [a.replace("@CFG@", cfg).replace("@DIR@", BAD) for a in args]
        if not args or args[0] not in jeansgrow.TABLES:
            continue
        command, rest, sets, files = args[0], args[1:], [], []
        usable = True
        while rest:
            a = rest.pop(0)
            if a == "--set" and rest:
                sets.append(rest.pop(0))
            elif a == "-o" and rest and rest[0] == "@OUT@":
                rest.pop(0)
            elif a.startswith("-"):
                usable = False
            else:
                files.append(a)
        if usable and len(files) == 1:
            with open(os.path.join(BAD, name)) as f:
                expected = f.read().strip().replace("@DIR@", BAD)
            cases.append(pytest.param(command, files[0], sets, expected, id=case))
    return cases


@pytest.mark.parametrize("command,path,sets,expected", bad_cases())
def test_bad_input_raises_the_programs_message(command, path, sets, expected):
    assert expected.startswith("jeansgrow: ")
    with pytest.raises(jeansgrow.InputError) as e:
        jeansgrow.compute(command, path, set=sets)
    assert str(e.value) == expected[len("jeansgrow: "):]


def test_enough_bad_cases_are_replayed():
    assert len(bad_cases()) >= 60


def test_bad_values_from_python_get_the_programs_checks():
    with pytest.raises(jeansgrow.InputError,
                       match=r"^--set cosmology.hubble_h=9.0: cosmology.hubble_h must satisfy"):
        jeansgrow.compute("epochs", REFERENCE, set={"cosmology.hubble_h": 9.0})
    with pytest.raises(jeansgrow.InputError, match="unknown key 'cosmology.hubble'"):
        jeansgrow.Parameters().set("cosmology.hubble", 0.7)
    with pytest.raises(jeansgrow.InputError, match="must be one of fluctuating"):
        jeansgrow.Parameters().set("perturbations.sound_speed", "cold")
    with pytest.raises(jeansgrow.InputError, match="cannot read parameter file"):
        jeansgrow.Universe("/nonexistent/params.cfg")
    with pytest.raises(jeansgrow.InputError, match="NaN|nan|inf"):
        jeansgrow.compute("epochs", REFERENCE, set={"cosmology.hubble_h": float("nan")})
    u = jeansgrow.Universe(REFERENCE)
    with pytest.raises(jeansgrow.InputError, match="output.redshifts"):
        u.scales(z=[20000.0])  # above perturbations.z_initial
    with pytest.raises(jeansgrow.InputError, match="perturbations.k_values"):
        u.growth(k=[0.01])
    with pytest.raises(jeansgrow.InputError, match="unknown table"):
        u.table("spectra")


def test_a_universe_answers_other_redshifts_and_wavenumbers(tmp_path):
    u = jeansgrow.Universe(REFERENCE, set={"perturbations.k_count": 4})
    for z, k in (([300.0, 30.0], [15.0, 150.0]), ([50.0], [40.0, 400.0, 4000.0])):
        overrides = {"perturbations.k_count": 4, "output.redshifts": z,
                     "perturbations.k_values": k}
        expected = program("growth", REFERENCE, *set_args(overrides),
                           output=str(tmp_path / "g.txt"))
        assert_same_table(u.growth(z=z, k=k), expected)
        expected = program("scales", REFERENCE, *set_args(overrides),
                           output=str(tmp_path / "s.txt"))
        assert_same_table(u.scales(z=z), jeansgrow.compute("scales", REFERENCE, set={
            "perturbations.k_count": 4, "output.redshifts": z}))
        numpy.testing.assert_array_equal(u.scales(z=z)["k_F[1/Mpc]"], expected["k_F[1/Mpc]"])


def test_a_scan_from_python_equals_jeansgrow_scan(tmp_path):
    vary = "cosmology.baryon_density_h2=0.01:0.04:3:log"
    overrides = {"output.redshifts": [200.0, 20.0]}
    expected = program("scan", REFERENCE, "--vary", vary, "--threads", "2",
                       *set_args(overrides), output=str(tmp_path / "scan.txt"))
    got = jeansgrow.scan(REFERENCE, vary, set=overrides, threads=2)
    assert_same_table(got, expected)
    assert got.failed == 0
    # Point by point through the object API: the scales columns agree.
    for omega_b in numpy.unique(expected["cosmology.baryon_density_h2"]):
        rows = expected[expected["cosmology.baryon_density_h2"] == omega_b]
        s = jeansgrow.Universe(REFERENCE, set={"cosmology.baryon_density_h2": float(omega_b)}
                               ).scales(z=[200.0, 20.0])
        for c in s.columns:
            numpy.testing.assert_array_equal(s[c], rows[c], err_msg=c)


def test_scan_threads_default_to_the_cores_this_process_may_use():
    # The CPU affinity (taskset, a batch system's binding), not all the
    # machine's cores, as `jeansgrow scan` without --threads.
    saved = os.sched_getaffinity(0)
    try:
        os.sched_setaffinity(0, {min(saved)})
        assert jeansgrow._usable_cores() == 1
    finally:
        os.sched_setaffinity(0, saved)
    assert jeansgrow._usable_cores() == len(saved)


def test_threads_calling_at_once_give_the_same_answers():
    u = jeansgrow.Universe(REFERENCE, set={"perturbations.k_count": 8})
    requests = [("scales", [500.0, 50.0]), ("growth", [100.0]), ("history", [700.0]),
                ("epochs", None), ("scales", [30.0]), ("growth", [300.0, 10.0])]
    serial = [u.table(what, z=z) for what, z in requests]
    results = [None] * (3 * len(requests))

    def work(i):
        what, z = requests[i % len(requests)]
        results[i] = u.table(what, z=z)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(len(results))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for i, r in enumerate(results):
        assert_same_table(r, serial[i % len(requests)])


def test_the_package_finds_the_library_by_itself():
    """`PYTHONPATH=src/python /usr/bin/python3 -c "import jeansgrow"` in a
    build made by tests/setup.sh (./build): no environment variable needed."""
    build = os.path.join(SOURCE, "build", "libjeansgrow.so")
    if os.path.realpath(os.environ["JEANSGROW_LIBRARY"]) != os.path.realpath(build):
        pytest.skip("this build is not the repository's ./build")
    env = {k: v for k, v in os.environ.items() if k != "JEANSGROW_LIBRARY"}
    env["PYTHONPATH"] = os.path.join(SOURCE, "src", "python")
    out = subprocess.run(["/usr/bin/python3", "-c", "import jeansgrow; print(jeansgrow.version())"],
                         env=env, check=True, capture_output=True, text=True).stdout
    assert out.strip() == jeansgrow.version()


def test_version_is_the_programs():
    out = subprocess.run([PROGRAM, "--version"], check=True, capture_output=True,
                         text=True).stdout
    assert jeansgrow.version() in out


def test_the_readme_python_example_runs_and_draws_its_figure(tmp_path):
    """The example of the README ("Use it as a library") as a reader would
    copy it, run from a folder with the repository's params/."""
    with open(os.path.join(SOURCE, "README.md"), encoding="utf-8") as f:
        readme = f.read()
    start = readme.index("<!-- python example")
    start = readme.index("```python\n", start) + len("```python\n")
    code = readme[start:readme.index("```\n", start)]
    (tmp_path / "params").symlink_to(os.path.join(SOURCE, "params"))
    (tmp_path / "example.py").write_text(code)
    env = dict(os.environ, MPLBACKEND="Agg", PYTHONPATH=os.path.join(SOURCE, "src", "python"))
    subprocess.run(["/usr/bin/python3", "example.py"], cwd=tmp_path, env=env, check=True)
    figure = tmp_path / "filtering_mass.png"
    assert figure.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
