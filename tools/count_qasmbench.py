#!/usr/bin/env python3
"""Independent count of qubits and expanded operations in OpenQASM 2 files.

Written separately from tutti's front end (no shared code, a different method):
the text is stripped of comments, cut at ';' and '}', and each statement is matched
with regular expressions. A user-defined gate counts as the number of operations in
its body, recursively; a statement with whole-register arguments counts once per
register element. Barriers are not counted; measure and reset count once per qubit.

Usage: tools/count_qasmbench.py tests/data/qasmbench > tests/data/qasmbench/expected_counts.tsv
"""
import pathlib
import re
import sys


def count(text):
    text = re.sub(r"//[^\n]*", "", text)
    qregs, gates, ops = {}, {}, 0
    # Gate definitions first: name -> (qargs, body text).
    for m in re.finditer(r"gate\s+(\w+)\s*(\([^)]*\))?\s*([\w\s,]+)\{([^}]*)\}", text):
        gates[m.group(1)] = m.group(4)
    text = re.sub(r"gate\s+\w+\s*(\([^)]*\))?\s*[\w\s,]+\{[^}]*\}", "", text)

    def body_ops(name):
        n = 0
        for st in gates[name].split(";"):
            st = st.strip()
            if not st or st.startswith("barrier"):
                continue
            callee = re.match(r"(\w+)", st).group(1)
            n += body_ops(callee) if callee in gates else 1
        return n

    for st in text.split(";"):
        st = st.strip()
        if not st:
            continue
        m = re.match(r"qreg\s+(\w+)\s*\[\s*(\d+)\s*\]", st)
        if m:
            qregs[m.group(1)] = int(m.group(2))
            continue
        if re.match(r"(OPENQASM|include|creg|barrier)\b", st):
            continue
        st = re.sub(r"^if\s*\([^)]*\)\s*", "", st)
        name = re.match(r"(\w+)", st).group(1)
        rest = st[len(name):]
        rest = re.sub(r"^\s*\([^)]*\)", "", rest)
        rest = rest.split("->")[0]
        width = 1
        for arg in rest.split(","):
            arg = arg.strip()
            if arg in qregs:
                width = qregs[arg]
        ops += width * (body_ops(name) if name in gates else 1)
    return sum(qregs.values()), ops


def main():
    root = pathlib.Path(sys.argv[1])
    print("file\tqubits\tops")
    for path in sorted(root.rglob("*.qasm")):
        q, n = count(path.read_text())
        print(f"{path.relative_to(root)}\t{q}\t{n}")


if __name__ == "__main__":
    main()
