"""The shared library's interface is exactly the public headers.

1. Every symbol libjeansgrow.so exports is a jg_ function declared in
   include/jeansgrow/, and every function declared there is exported:
   private jg__ functions and whatever the library links in stay hidden
   (cmake/jeansgrow.map), and no public function is lost on the way.
2. Every public function that takes an error record is called with a NULL
   one in tests/test_embed.c (suite null_error), so that the promise of
   error.h ("every jg_error *err argument may be NULL") is tested for all.

Usage: check_public_api.py LIBJEANSGROW_SO SOURCE_DIR
Exit status 0 when both hold; 1 with one line per difference otherwise.
"""
import os
import re
import subprocess
import sys

# NAME(PARAMETERS); -- not a function-pointer member "jg_status (*fn)(...);"
DECLARATION = re.compile(r"\b(jg_[a-z][A-Za-z0-9_]*)\s*\((?!\s*\*)([^;{]*?)\)\s*"
                         r"(?:__attribute__\s*\(\(.*?\)\)\s*)?;", re.S)


def public_functions(include_dir):
    """{name: parameter text} of every function declared in the public headers."""
    found = {}
    for n in sorted(os.listdir(include_dir)):
        if not n.endswith((".h", ".h.in")):
            continue
        with open(os.path.join(include_dir, n), encoding="utf-8") as f:
            text = f.read()
        text = re.sub(r"/\*.*?\*/", " ", text, flags=re.S)
        text = re.sub(r"//[^\n]*", " ", text)
        text = re.sub(r"^\s*#(?:[^\n]*\\\n)*[^\n]*", " ", text, flags=re.M)
        text = re.sub(r"typedef[^;]*\(\s*\*[^;]*;", " ", text)  # function-pointer types
        for m in DECLARATION.finditer(text):
            found[m.group(1)] = m.group(2)
    return found


def exported_symbols(library):
    out = subprocess.run(["nm", "-D", "--defined-only", library], check=True,
                         capture_output=True, text=True).stdout
    symbols = set()
    for line in out.splitlines():
        parts = line.split()
        if len(parts) == 3 and parts[1] != "A":  # "A": the version node itself
            symbols.add(parts[2].split("@")[0])
    return symbols


def main():
    library, root = sys.argv[1], sys.argv[2]
    declared = public_functions(os.path.join(root, "include", "jeansgrow"))
    exported = exported_symbols(library)
    problems = []
    for name in sorted(exported - set(declared)):
        problems.append("exported but not declared in include/jeansgrow/: %s" % name)
    for name in sorted(set(declared) - exported):
        problems.append("declared in include/jeansgrow/ but not exported: %s" % name)
    with open(os.path.join(root, "tests", "test_embed.c"), encoding="utf-8") as f:
        test = f.read()
    null_suite = test[test.find("/* ---- null_error"):test.find("/* ---- end of null_error")]
    for name, params in sorted(declared.items()):
        if "jg_error *" in params and not re.search(r"\b%s\s*\(" % name, null_suite):
            problems.append("takes a jg_error * but is not called with NULL in "
                            "tests/test_embed.c (suite null_error): %s" % name)
    for p in problems:
        print(p)
    print("%d functions declared, %d exported, %d take an error record"
          % (len(declared), len(exported), sum("jg_error *" in p for p in declared.values())))
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
