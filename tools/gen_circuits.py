#!/usr/bin/env python3
"""Writes tutti's own benchmark suite into circuits/. Run from the repository root:
tools/gen_circuits.py. Graphs, secrets and seeds are invented for this suite."""
import math
import pathlib
import random

OUT = pathlib.Path("circuits")
HEAD = 'OPENQASM 2.0;\ninclude "qelib1.inc";\n'


def write(name, comment, n, body, clbits=0):
    text = f"// {comment}\n{HEAD}qreg q[{n}];\n"
    if clbits:
        text += f"creg c[{clbits}];\n"
    text += "\n".join(body) + "\n"
    (OUT / f"{name}.qasm").write_text(text)


def ghz(n):
    body = ["h q[0];"] + [f"cx q[{i}],q[{i+1}];" for i in range(n - 1)] + ["measure q -> c;"]
    write(f"ghz_{n}", f"GHZ state on {n} qubits: one Hadamard, then a chain of CNOTs.", n, body, n)


def qft(n):
    body = []
    for i in range(n):
        body.append(f"h q[{i}];")
        for j in range(i + 1, n):
            body.append(f"cu1(pi/{2 ** (j - i)}) q[{j}],q[{i}];")
    for i in range(n // 2):
        body.append(f"swap q[{i}],q[{n - 1 - i}];")
    write(f"qft_{n}", f"Quantum Fourier transform on {n} qubits (Nielsen and Chuang, section 5.1).", n, body)


def bv(secret):
    n = len(secret) + 1
    body = [f"x q[{n-1}];", "h q;"]
    body += [f"cx q[{i}],q[{n-1}];" for i, b in enumerate(secret) if b == "1"]
    body += [f"h q[{i}];" for i in range(n - 1)]
    body += [f"measure q[{i}] -> c[{i}];" for i in range(n - 1)]
    write(f"bv_{n}", f"Bernstein-Vazirani with the invented secret {secret}.", n, body, n - 1)


def grover3():
    body = ["h q;"]
    for _ in range(2):
        body += ["x q[1];", "h q[2];", "ccx q[0],q[1],q[2];", "h q[2];", "x q[1];"]  # mark |101>
        body += ["h q;", "x q;", "h q[2];", "ccx q[0],q[1],q[2];", "h q[2];", "x q;", "h q;"]
    body.append("measure q -> c;")
    write("grover_3", "Grover search on 3 qubits for the invented marked state 101, two iterations.", 3, body, 3)


def grover4():
    body = ["h q;"]
    for _ in range(3):
        body += ["x q[0];", "x q[2];", "h q[3];", "c3x q[0],q[1],q[2],q[3];", "h q[3];", "x q[0];", "x q[2];"]
        body += ["h q;", "x q;", "h q[3];", "c3x q[0],q[1],q[2],q[3];", "h q[3];", "x q;", "h q;"]
    body.append("measure q -> c;")
    write("grover_4", "Grover search on 4 qubits for the invented marked state 1010, three iterations.", 4, body, 4)


def toffoli():
    write("toffoli_3", "One Toffoli gate on a superposed input.", 3, ["h q[0];", "h q[1];", "ccx q[0],q[1],q[2];"])
    write("mcx_5", "A four-controlled X (c4x) after preparing the controls.", 5,
          ["h q[0];", "h q[1];", "x q[2];", "h q[3];", "c4x q[0],q[1],q[2],q[3],q[4];"])
    write("cswap_3", "Controlled swap (Fredkin) on a mixed input.", 3, ["h q[0];", "x q[1];", "cswap q[0],q[1],q[2];"])


def adder():
    # Ripple-carry adder of two 3-bit numbers with majority/unmajority blocks
    # (Cuccaro et al., quant-ph/0410184), written out here.
    n = 8  # cin, a0..a2, b0..b2, cout
    cin, a, b, cout = 0, [1, 2, 3], [4, 5, 6], 7
    body = [f"x q[{a[0]}];", f"x q[{a[2]}];", f"x q[{b[0]}];", f"x q[{b[1]}];"]  # a = 5, b = 3 (invented)

    def maj(x, y, z):
        return [f"cx q[{z}],q[{y}];", f"cx q[{z}],q[{x}];", f"ccx q[{x}],q[{y}],q[{z}];"]

    def uma(x, y, z):
        return [f"ccx q[{x}],q[{y}],q[{z}];", f"cx q[{z}],q[{x}];", f"cx q[{x}],q[{y}];"]

    body += maj(cin, b[0], a[0]) + maj(a[0], b[1], a[1]) + maj(a[1], b[2], a[2])
    body.append(f"cx q[{a[2]}],q[{cout}];")
    body += uma(a[1], b[2], a[2]) + uma(a[0], b[1], a[1]) + uma(cin, b[0], a[0])
    body += [f"measure q[{b[i]}] -> c[{i}];" for i in range(3)] + [f"measure q[{cout}] -> c[3];"]
    write("ripple_adder_8", "Ripple-carry adder of two 3-bit numbers (5 + 3, invented inputs).", n, body, 4)


def qaoa(name, n, edges, gamma, beta, comment):
    body = ["h q;"]
    for (i, j) in edges:
        body.append(f"rzz({2 * gamma:.6f}) q[{i}],q[{j}];")
    body.append(f"rx({2 * beta:.6f}) q;")
    body.append("measure q -> c;")
    write(name, comment, n, body, n)


def trotter_heisenberg(n, steps, dt):
    body = [f"x q[{i}];" for i in range(0, n, 2)]
    for _ in range(steps):
        for i in range(n - 1):
            body += [f"rxx({2 * dt}) q[{i}],q[{i+1}];", f"ryy({2 * dt}) q[{i}],q[{i+1}];", f"rzz({2 * dt}) q[{i}],q[{i+1}];"]
    write(f"trotter_heisenberg_{n}", f"Heisenberg chain of {n} spins, {steps} first-order Trotter steps of dt = {dt}.", n, body)


def trotter_ising(n, steps, dt, h):
    body = []
    for _ in range(steps):
        for i in range(n - 1):
            body.append(f"rzz({2 * dt}) q[{i}],q[{i+1}];")
        body.append(f"rx({2 * h * dt}) q;")
    write(f"trotter_ising_{n}", f"Transverse-field Ising chain of {n} spins, {steps} Trotter steps (dt = {dt}, h = {h}).", n, body)


def w_state(n):
    body = [f"x q[0];"]
    for k in range(n - 1):
        theta = 2 * math.acos(math.sqrt(1 / (n - k)))
        body += [f"cry({theta:.12f}) q[{k}],q[{k+1}];", f"cx q[{k+1}],q[{k}];"]
    body.append("measure q -> c;")
    write(f"w_state_{n}", f"W state on {n} qubits by a cascade of controlled rotations.", n, body, n)


def random_clifford(n, length, seed):
    rng = random.Random(seed)
    one, two = ["h", "s", "sdg", "x", "z", "sx"], ["cx", "cz", "swap"]
    body = []
    for _ in range(length):
        if rng.random() < 0.4:
            a = rng.randrange(n)
            b = (a + rng.randrange(1, n)) % n
            body.append(f"{rng.choice(two)} q[{a}],q[{b}];")
        else:
            body.append(f"{rng.choice(one)} q[{rng.randrange(n)}];")
    write(f"random_clifford_{n}", f"Random Clifford circuit, {length} gates, seed {seed}.", n, body)


def random_u3(n, layers, seed):
    rng = random.Random(seed)
    body = []
    for _ in range(layers):
        for q in range(n):
            a, b, c = (rng.uniform(-math.pi, math.pi) for _ in range(3))
            body.append(f"u3({a:.6f},{b:.6f},{c:.6f}) q[{q}];")
        for q in range(layers % 2, n - 1, 2):
            body.append(f"cx q[{q}],q[{q+1}];")
    write(f"random_u3_{n}", f"Layers of random single-qubit gates and CNOTs, seed {seed}.", n, body)


def teleport():
    body = ["u3(0.3,0.2,0.1) q[0];", "h q[1];", "cx q[1],q[2];", "cx q[0],q[1];", "h q[0];",
            "measure q[0] -> c0[0];", "measure q[1] -> c1[0];", "if(c1==1) x q[2];", "if(c0==1) z q[2];"]
    text = f"// Teleportation of one qubit with feed-forward corrections.\n{HEAD}qreg q[3];\ncreg c0[1];\ncreg c1[1];\n"
    (OUT / "teleport_3.qasm").write_text(text + "\n".join(body) + "\n")


def repetition():
    body = ["h q[0];", "cx q[0],q[1];", "cx q[0],q[2];", "rx(0.2) q[1];",
            "cx q[0],q[3];", "cx q[1],q[3];", "cx q[1],q[4];", "cx q[2],q[4];",
            "measure q[3] -> c[0];", "measure q[4] -> c[1];", "reset q[3];", "reset q[4];",
            "if(c==1) x q[0];", "if(c==3) x q[1];", "if(c==2) x q[2];"]
    write("repetition_5", "Three-qubit repetition code, one round of syndrome extraction with mid-circuit measurement, reset and correction.", 5, body, 2)


def phase_estimation():
    body = ["x q[3];", "h q[0];", "h q[1];", "h q[2];"]
    for k in range(3):
        body.append(f"cp({(2 ** k) * 2 * math.pi / 5:.12f}) q[{k}],q[3];")
    body += ["swap q[0],q[2];", "h q[0];", "cu1(-pi/2) q[1],q[0];", "h q[1];", "cu1(-pi/4) q[2],q[0];",
             "cu1(-pi/2) q[2],q[1];", "h q[2];", "measure q[0] -> c[0];", "measure q[1] -> c[1];", "measure q[2] -> c[2];"]
    write("phase_estimation_4", "Phase estimation of the invented phase 1/5 with three counting qubits.", 4, body, 3)


def swap_test():
    body = ["ry(0.7) q[1];", "ry(1.3) q[3];", "rx(0.4) q[2];", "rx(0.9) q[4];", "h q[0];",
            "cswap q[0],q[1],q[3];", "cswap q[0],q[2],q[4];", "h q[0];", "measure q[0] -> c[0];"]
    write("swap_test_5", "Swap test comparing two invented two-qubit product states.", 5, body, 1)


def deutsch_jozsa(n):
    body = [f"x q[{n-1}];", "h q;"] + [f"cx q[{i}],q[{n-1}];" for i in range(0, n - 1, 2)] + [f"h q[{i}];" for i in range(n - 1)]
    write(f"deutsch_jozsa_{n}", f"Deutsch-Jozsa on {n - 1} input bits with an invented balanced oracle.", n, body)


def main():
    OUT.mkdir(exist_ok=True)
    for n in (5, 12, 40):
        ghz(n)
    for n in (3, 5, 8):
        qft(n)
    bv("1011010")
    bv("1100101011011001101")
    grover3()
    grover4()
    toffoli()
    adder()
    qaoa("qaoa_ring_6", 6, [(i, (i + 1) % 6) for i in range(6)], 0.41, 0.23,
         "One QAOA layer for MaxCut on an invented 6-node ring.")
    qaoa("qaoa_graph_8", 8, [(0, 1), (0, 4), (1, 2), (1, 5), (2, 3), (2, 6), (3, 7), (4, 5), (5, 6), (6, 7), (0, 7)],
         0.37, 0.61, "One QAOA layer for MaxCut on an invented 8-node graph with 11 edges.")
    trotter_heisenberg(6, 2, 0.1)
    trotter_ising(10, 2, 0.2, 0.8)
    w_state(3)
    w_state(5)
    random_clifford(10, 60, 7)
    random_clifford(40, 160, 11)
    random_u3(5, 4, 3)
    teleport()
    repetition()
    phase_estimation()
    swap_test()
    deutsch_jozsa(6)


main()
