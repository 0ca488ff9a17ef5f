#!/usr/bin/python3
"""boldsum's JSON sidecar reader (src/config/json_members, through
tests/tools/config_json_probe) against Python's json module (standard library):

* Objects written by json.dumps in several layouts (compact, indented with spaces or a
  tab, ASCII escapes or raw UTF-8) with nested values, escapes and numbers: boldsum must
  list the same top-level names in order, the same numbers (doubles, exactly), and the
  line:column it reports for each value (columns counting bytes) must be where
  json.JSONDecoder.raw_decode reads that same value.
* Documents damaged by deleting, inserting or replacing one character: boldsum accepts
  exactly those that json.loads accepts as an object (NaN/Infinity, which Python allows
  as an extension, are refused on both sides; inputs with lone surrogate escapes and
  deep nesting are not generated).
"""
import json
import os
import random
import subprocess
import sys
import tempfile

PROBE = os.path.join(os.environ.get("BOLDSUM_PROBE_DIR", "build/tests"), "config_json_probe")
RNG = random.Random(20261202)
FAILURES = []
ALPHABET = "abcXYZ09 _-\"\\/\n\t\u00e9\u4e2d\U0001f3b5"


def check(condition, message):
    if not condition:
        FAILURES.append(message)


def random_text():
    return "".join(RNG.choice(ALPHABET) for _ in range(RNG.randint(0, 8)))


def random_number():
    kind = RNG.randrange(4)
    if kind == 0:
        return RNG.randint(-10**6, 10**6)
    if kind == 1:
        return RNG.uniform(-1e3, 1e3)
    if kind == 2:
        return RNG.uniform(0, 1) * 10.0 ** RNG.randint(-300, 300)
    return float(RNG.randint(-5, 5))


def random_value(depth):
    kind = RNG.randrange(7 if depth < 4 else 4)
    if kind == 0:
        return random_number()
    if kind == 1:
        return random_text()
    if kind == 2:
        return RNG.choice([True, False, None])
    if kind == 3:
        return random_number()
    if kind in (4, 5):
        return [random_value(depth + 1) for _ in range(RNG.randint(0, 3))]
    return {random_text(): random_value(depth + 1) for _ in range(RNG.randint(0, 3))}


def random_document():
    members = {"RepetitionTime": random_number()}
    for _ in range(RNG.randint(0, 5)):
        members[random_text()] = random_value(1)
    items = list(members.items())
    RNG.shuffle(items)
    layout = RNG.randrange(4)
    options = [dict(), dict(indent=2), dict(indent="\t"), dict(separators=(",", ":"))][layout]
    return json.dumps(dict(items), ensure_ascii=RNG.random() < 0.5, **options)


def run_probe(documents):
    paths = []
    with tempfile.TemporaryDirectory() as folder:
        for i, text in enumerate(documents):
            path = os.path.join(folder, "d%d.json" % i)
            with open(path, "wb") as f:
                f.write(text.encode("utf-8"))
            paths.append(path)
        out = subprocess.run([PROBE] + paths, capture_output=True, check=True).stdout
    results, current = [], []
    for line in out.decode("utf-8", "replace").split("\n"):
        if line == "end":
            results.append(current)
            current = []
        elif line:
            current.append(line.split("\t"))
    return results


def char_offset(text, line, column):
    """Index in `text` of the 1-based line and byte column."""
    lines = text.split("\n")
    before = sum(len(l) + 1 for l in lines[:line - 1])
    prefix = lines[line - 1].encode("utf-8")[:column - 1].decode("utf-8")
    return before + len(prefix)


def check_valid_documents():
    documents = [random_document() for _ in range(300)]
    decoder = json.JSONDecoder()
    for text, result in zip(documents, run_probe(documents)):
        expected = json.loads(text)
        if any(row[0] == "error" for row in result):
            check(False, "rejected a valid document: %r: %r" % (text, result))
            continue
        names = [json.loads(row[1]) for row in result]
        check(names == list(expected), "names %r != %r" % (names, list(expected)))
        for row, name in zip(result, names):
            value = expected.get(name)
            at = char_offset(text, int(row[2]), int(row[3]))
            found, _ = decoder.raw_decode(text, at)
            check(found == value, "%r: value at %s:%s is %r, not %r" % (text, row[2], row[3],
                                                                      found, value))
            is_number = isinstance(value, (int, float)) and not isinstance(value, bool)
            check(row[4] == ("1" if is_number else "0"), "%r: number flag of %r" % (text, name))
            if is_number:
                check(float(row[5]) == float(value), "%r: %r read as %s" % (text, value, row[5]))
    return len(documents)


def refuse_constant(name):
    raise ValueError(name)


def python_accepts(text):
    try:
        value = json.loads(text, parse_constant=refuse_constant)
    except (ValueError, RecursionError):
        return False
    return isinstance(value, dict)


def check_damaged_documents():
    documents = []
    for _ in range(600):
        text = random_document()
        at = RNG.randrange(len(text) + 1)
        action = RNG.randrange(3)
        piece = RNG.choice(list("{}[],:\"\\ 0-+.eE1tfnu") + ["\n", "\x01"])
        if action == 0 and at < len(text):
            text = text[:at] + text[at + 1:]
        elif action == 1:
            text = text[:at] + piece + text[at:]
        elif at < len(text):
            text = text[:at] + piece + text[at + 1:]
        if "\\ud" in text.lower():
            continue  # surrogate escapes: Python keeps lone ones, boldsum writes U+FFFD
        documents.append(text)
    agreed = 0
    for text, result in zip(documents, run_probe(documents)):
        ours = not any(row[0] == "error" for row in result)
        check(ours == python_accepts(text),
              "%r: boldsum %s, json.loads %s" % (text, "accepts" if ours else "rejects",
                                                "accepts" if python_accepts(text) else "rejects"))
        agreed += ours == python_accepts(text)
    return agreed, len(documents)


def main():
    valid = check_valid_documents()
    agreed, damaged = check_damaged_documents()
    print("valid documents: %d; damaged documents: %d of %d decided as json.loads does"
          % (valid, agreed, damaged))
    for failure in FAILURES[:20]:
        print("FAIL:", failure)
    print("%d passed, %d failed" % (1 if not FAILURES else 0, 1 if FAILURES else 0))
    return 1 if FAILURES else 0


if __name__ == "__main__":
    sys.exit(main())
