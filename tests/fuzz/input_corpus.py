"""A corpus of bad measurement files, step lists and option values for `termination match`.

Used by the seeded fast subset in ``test_input_fuzz.py`` and by the long run
``run_input_corpus.py``.  Each case is ``(kind, description, files, args)``:
``files`` maps a file name to its bytes (written into a fresh folder, where
``{dir}`` in ``args`` points), ``args`` follow ``match rocksalt:Na,Cl``.
Every case is bad by construction and must end with exit code 2, one line on
stderr and every input file unchanged.  ``mutations`` makes random byte
edits of good files, which may or may not stay valid (the long run accepts a
clean result or a clean error, never a traceback, a hang or a changed file).
"""

import random

GOOD_TOML = (
    b"# termination measurement file\n"
    b"mount = [0, 0, 1]\n"
    b"tilt = { value = 0.5, sigma = 1.0 }\n"
    b"spacings = [ { value = 3.99, sigma = 0.1 }, { value = 3.99, sigma = 0.1 } ]\n"
    b"row_angle = { value = 90.0, sigma = 2.0 }\n"
    b"steps = [ { value = 2.82, sigma = 0.1 }, 5.64 ]\n"
    b"[visibility]\n"
    b'visible = ["Na"]\n'
    b"decay_length = 0.5\n"
)
GOOD_STEPS = b"# step height (A)  sigma (A)\n2.82 0.1\n5.64\n2.82+-0.1\n"

# (description, TOML text): every one is a defect the reader must name
TOML_DEFECTS = [
    ("malformed TOML", b"mount = [0, 0, 1\n"),
    ("unterminated string", b'tilt = "2+-2\n'),
    ("unknown key", b"tilt = 3.0\ncolour = 2\n"),
    ("unknown visibility key", b"[visibility]\nshade = 1\n"),
    ("visibility not a table", b"visibility = 3\n"),
    ("mount (0 0 0)", b"mount = [0, 0, 0]\n"),
    ("mount of two integers", b"mount = [1, 0]\n"),
    ("mount of floats", b"mount = [0.5, 0, 1]\n"),
    ("mount of text", b'mount = "001"\n'),
    ("mount beyond 100", b"mount = [1000003, 999983, 1]\n"),
    ("mount i != -(h+k)", b"mount = [1, 0, 1, 0]\n"),
    ("max_index 0", b"max_index = 0\n"),
    ("max_index 13", b"max_index = 13\n"),
    ("max_index true", b"max_index = true\n"),
    ("max_index float", b"max_index = 2.5\n"),
    ("tilt NaN", b"tilt = nan\n"),
    ("tilt inf", b"tilt = inf\n"),
    ("tilt 91", b"tilt = 91.0\n"),
    ("tilt negative", b"tilt = -1.0\n"),
    ("tilt negative sigma", b"tilt = { value = 3.0, sigma = -1.0 }\n"),
    ("tilt sigma 1e9", b"tilt = { value = 3.0, sigma = 1e9 }\n"),
    ("tilt without value", b"tilt = { sigma = 1.0 }\n"),
    ("tilt extra key", b"tilt = { value = 3.0, error = 1.0 }\n"),
    ("tilt text", b'tilt = "thirty"\n'),
    ("tilt boolean", b"tilt = true\n"),
    ("tilt list", b"tilt = [3.0]\n"),
    ("row angle 0", b"row_angle = 0.0\n"),
    ("row angle 180", b"row_angle = 180.0\n"),
    ("spacings not a list", b"spacings = 3.99\n"),
    ("spacing zero", b"spacings = [0.0]\n"),
    ("spacing negative", b"spacings = [-3.99]\n"),
    ("spacing 1e308", b"spacings = [1e308]\n"),
    ("spacing NaN", b"spacings = [nan]\n"),
    ("step zero", b"steps = [0.0]\n"),
    ("step 1e5", b"steps = [1e5]\n"),
    ("step text", b'steps = ["2.82 Angstrom"]\n'),
    ("steps of tables of tables", b"steps = [ { value = { value = 2.82 } } ]\n"),
    ("1001 steps", b"steps = [" + b", ".join([b"2.82"] * 1001) + b"]\n"),
    ("visible not a list", b'[visibility]\nvisible = "Na"\n'),
    ("visible not a symbol", b'[visibility]\nvisible = ["sodium"]\n'),
    ("weight negative", b"[visibility]\nweights = { Na = -1.0 }\n"),
    ("weight NaN", b"[visibility]\nweights = { Na = nan }\n"),
    ("weight key not a symbol", b"[visibility]\nweights = { na1 = 1.0 }\n"),
    ("decay length zero", b"[visibility]\ndecay_length = 0.0\n"),
    ("decay length negative", b"[visibility]\ndecay_length = -0.5\n"),
    ("depth beyond 1000", b"[visibility]\ndepth = 1e6\n"),
    ("site weight negative", b"[visibility]\nsite_weights = { Na5c = -1.0 }\n"),
    ("site weight bad site", b"[visibility]\nsite_weights = { Na5x = 1.0 }\n"),
    ("cells not a list", b'cells = "2x1"\n'),
    ("cell empty text", b'cells = [""]\n'),
    ("cell garbage", b'cells = ["2y1"]\n'),
    ("cell 1x1", b'cells = ["1x1"]\n'),
    ("cell beyond 100", b'cells = ["1000x1"]\n'),
    ("nested 5000 deep", b"a = " + b"[" * 5000 + b"]" * 5000 + b"\n"),
    ("binary junk", bytes(range(256)) * 4),
    ("not UTF-8", b"tilt = 3.0 # \xff\xfe\n"),
    ("NUL byte", b"tilt = 3.0\x00\n"),
    ("over 1 MiB", b"# " + b"x" * (1024 * 1024) + b"\n"),
    ("duplicate key", b"tilt = 3.0\ntilt = 4.0\n"),
]

# (description, step-list text)
STEP_DEFECTS = [
    ("negative step", b"-2.82\n"),
    ("zero step", b"0\n"),
    ("NaN step", b"nan\n"),
    ("infinite step", b"inf\n"),
    ("step 1e400", b"1e400\n"),
    ("step 1e5", b"100000\n"),
    ("word", b"two point eight\n"),
    ("three columns", b"2.82 0.1 7\n"),
    ("negative sigma", b"2.82 -0.1\n"),
    ("sigma with +-", b"2.82 +-0.1 0.2\n"),
    ("sigma 1e9", b"2.82 1e9\n"),
    ("only comments", b"# nothing measured\n\n"),
    ("empty file", b""),
    ("1001 steps", b"2.82\n" * 1001),
    ("100k steps", b"2.82\n" * 100_000),
    ("binary junk", bytes(range(256)) * 4),
    ("not UTF-8", b"2.82\n\xff\xfe\n"),
    ("over 1 MiB", b"# " + b"x" * (1024 * 1024) + b"\n2.82\n"),
]

# (option, value): each value is out of range, unreadable or of the wrong kind
OPTION_DEFECTS = [
    ("--step", "abc"),
    ("--step", "-1"),
    ("--step", "0"),
    ("--step", "nan"),
    ("--step", "inf"),
    ("--step", "1e308"),
    ("--step", "2.82+-nan"),
    ("--step", "2.82+--0.1"),
    ("--spacing", "0"),
    ("--spacing", "-3.99"),
    ("--spacing", "1e400"),
    ("--tilt", "91"),
    ("--tilt", "-0.5"),
    ("--tilt", "30+-1e9"),
    ("--row-angle", "0"),
    ("--row-angle", "180"),
    ("--row-angle", "nan"),
    ("--mount", "0 0 0"),
    ("--mount", "101 0 1"),
    ("--mount", "1 0 1 0"),
    ("--max-index", "0"),
    ("--max-index", "13"),
    ("--max-index", "-3"),
    ("--max-index", "abc"),
    ("--charge", "Na=abc"),
    ("--charge", "Na=1e300"),
    ("--charge", "Na=11"),
    ("--charge", "Xx=1"),
    ("--charge", "Na"),
    ("--weight", "Na=-1"),
    ("--weight", "Na=nan"),
    ("--visible", "Xx"),
    ("--site-weight", "Na5c=-1"),
    ("--site-weight", "Na=1"),
    ("--decay-length", "0"),
    ("--decay-length", "-1"),
    ("--decay-length", "nan"),
    ("--depth", "-1"),
    ("--depth", "1e9"),
    ("--mount-sigma", "-1"),
    ("--mount-sigma", "nan"),
    ("--layer-tol", "-1"),
    ("--layer-tol", "nan"),
    ("--bond-factor", "0"),
    ("--bond-factor", "-1"),
    ("--bond-cutoff", "-2"),
    ("--unit-ratio", "0.5"),
    ("--max-cell", "0"),
    ("--max-cell", "13"),
    ("--cell", "2y1"),
    ("--cell", "1x1"),
    ("--cell", "1000x1"),
    ("--top", "0"),
    ("--top", "-1"),
    ("--a", "-5.64"),
    ("--a", "0"),
    ("--a", "nan"),
    ("--a", "1e9"),
    ("--symprec", "0"),
    ("--symprec", "-1"),
    ("--symprec", "nan"),
    ("--x", "nan"),
    ("--measurement", "{dir}/missing.toml"),
    ("--steps", "{dir}/missing.txt"),
    ("--steps", "{dir}"),
    ("--measurement", "/dev/zero"),
    ("--steps", "/dev/null"),
    ("--pixel-size", "0.5A"),
]

_BAD_NUMBERS = ["nan", "-inf", "inf", "0", "-0", "-1", "1e309", "-1e-300", "1e400", "abc", "", "1..2", "0x10"]


def cases():
    """Every named case: (kind, description, files, args)."""
    out = []
    for desc, text in TOML_DEFECTS:
        out.append(("measurement", desc, {"m.toml": text}, ["--measurement", "{dir}/m.toml"]))
    for desc, text in STEP_DEFECTS:
        out.append(("steps", desc, {"steps.txt": text}, ["--steps", "{dir}/steps.txt"]))
    for option, value in OPTION_DEFECTS:
        out.append(("option", f"{option} {value}", {}, [option, *value.split()]))
    return out


def random_cases(rng, count):
    """``count`` generated defects: a bad number in a random key of a file, a list or an option."""
    out = []
    toml_keys = ["tilt", "row_angle", "spacings", "steps", "decay_length", "depth"]
    options = ["--step", "--spacing", "--tilt", "--row-angle", "--decay-length", "--depth", "--mount-sigma", "--a"]
    for i in range(count):
        bad = rng.choice(_BAD_NUMBERS[:-3] if rng.random() < 0.7 else _BAD_NUMBERS)
        kind = rng.choice(["measurement", "steps", "option"])
        if kind == "measurement":
            key = rng.choice(toml_keys)
            numeric = bad and bad[0].isdigit() and bad != "0x10"  # TOML reads 0x10 as the valid 16
            value = bad if numeric or bad in ("nan", "inf", "-inf") else f'"{bad}"'
            value = f"[{value}]" if key in ("spacings", "steps") else value
            if bad in ("0", "-0") and key in ("tilt", "depth"):
                value = "-1"  # zero is a valid tilt and depth
            text = f"{key} = {value}\n"
            if key in ("decay_length", "depth"):
                text = f"[visibility]\n{text}"
            out.append(
                (kind, f"random {i}: {text.strip()}", {"m.toml": text.encode()}, ["--measurement", "{dir}/m.toml"])
            )
        elif kind == "steps":
            good = ["2.82", "5.64 0.1", "2.82+-0.1"]
            lines = [rng.choice(good) for _ in range(rng.randrange(0, 5))]
            lines.insert(rng.randrange(len(lines) + 1), bad if bad else "x")
            text = "\n".join(lines) + "\n"
            out.append(
                (kind, f"random {i}: steps {lines}", {"steps.txt": text.encode()}, ["--steps", "{dir}/steps.txt"])
            )
        else:
            option = rng.choice(options)
            value = bad
            if option in ("--tilt", "--depth", "--mount-sigma") and bad in ("0", "-0"):
                value = "-1"  # zero is valid for these
            out.append((kind, f"random {i}: {option} {value!r}", {}, [option, value]))
    return out


def corpus(seed, n):
    """A seeded sample of ``n`` cases: named ones first drawn, then generated ones."""
    rng = random.Random(seed)
    named = cases()
    take = rng.sample(named, min(n, len(named)))
    return take + random_cases(rng, max(0, n - len(take)))


def mutations(rng, count):
    """``count`` random byte edits of the good measurement file and step list: (kind, description, files, args)."""
    out = []
    for i in range(count):
        name, good, option = rng.choice([("m.toml", GOOD_TOML, "--measurement"), ("steps.txt", GOOD_STEPS, "--steps")])
        data = bytearray(good)
        for _ in range(rng.randrange(1, 6)):
            op = rng.random()
            pos = rng.randrange(len(data) + 1)
            if op < 0.4 and data:
                data[min(pos, len(data) - 1)] = rng.randrange(256)
            elif op < 0.7:
                data[pos:pos] = bytes([rng.choice(b'0123456789.-+e[]{}=,#\n" naif')])
            elif data:
                del data[min(pos, len(data) - 1)]
        out.append(("mutation", f"mutation {i} of {name}", {name: bytes(data)}, [option, f"{{dir}}/{name}"]))
    return out


def run(case, folder):
    """Run one case in ``folder`` through the console entry point: (exit code, stderr lines, inputs unchanged)."""
    import contextlib
    import io

    from termination import cli

    _, _, files, args = case
    for name, data in files.items():
        (folder / name).write_bytes(data)
    args = [a.replace("{dir}", str(folder)) for a in args]
    out, err = io.StringIO(), io.StringIO()
    code = 0
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            cli.main(["match", "rocksalt:Na,Cl", "--max-index", "1", *args])
        except SystemExit as stop:
            code = stop.code if isinstance(stop.code, int) else 1
    unchanged = all((folder / name).read_bytes() == data for name, data in files.items())
    return code, err.getvalue().strip().splitlines(), unchanged
