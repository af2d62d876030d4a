#!/usr/bin/env python3
"""Writes the seed inputs of fuzz_pipeline (fuzz/fuzz_pipeline.cc) into
fuzz/corpus/pipeline/. Byte 0 and byte 1 choose layouts and settings (see Decode() there);
the rest is the input file. The scenario is the fuzz target's own: a
community tool-lending shed. Personal data is fake and safe (RFC 2606 domains,
RFC 5737 addresses, a published test card number, a fictional IBAN).
Regenerate: /usr/bin/python3 fuzz/make_pipeline_seeds.py"""
import json
import os

HERE = os.path.join(os.path.dirname(os.path.abspath(__file__)), "corpus", "pipeline")
EVAL_COPY = "How long may a member keep the tile cutter from the Elm Street tool shed before it is due back?"
STAFF_Q = "Can the pressure washer be lent out in freezing weather?"
STAFF_A = ("No: water left in the pump can freeze and crack it, so the shed keeps it in until the frost has "
           "passed.")


def line(obj):
    return json.dumps(obj, ensure_ascii=False)


def choice_lines():
    out = []
    prompts = ["Which drill bits suit a brick wall in the shed's kit?",
               "Is the long ladder free on Saturday morning?",
               EVAL_COPY,
               STAFF_Q,
               "Please send the booking form to member.42@example.org or call from 192.0.2.17.",
               "My card 4111 1111 1111 1111 was charged twice for the hedge trimmer deposit."]
    for i, p in enumerate(prompts):
        out.append(line({"id": f"c{i}", "prompt": p,
                         "candidates": ["Yes, the long one is free.", STAFF_A if i == 3 else "Ask at the desk.",
                                        "It depends on the wall."][: 2 + i % 2],
                         "choice": i % 2, "who": f"v{i % 2}", "src": "desk" if i % 3 else "web",
                         "thread": f"t{i // 2}", "meta": {"note": "IBAN GB82 WEST 1234 5698 7654 32"}}))
    out.append(out[0])  # an exact duplicate
    dup = json.loads(out[1]); dup["id"] = "c1b"; dup["choice"] = 1
    out.append(line(dup))  # a label conflict
    return "\n".join(out) + "\n"


def ranked_lines():
    out = []
    for i in range(5):
        out.append(line({"id": f"r{i}", "prompt": f"Which sander should I borrow for floor {i}?",
                         "candidates": ["The belt sander.", "The orbital sander.", "Neither, hire one."],
                         "ranks": [[1, 2, 3], [2, 1, 3], [1, 1, 3], [3, 2, 1], [1, 3, 2]][i], "g": f"g{i % 2}"}))
    return "\n".join(out) + "\n"


def pairwise_lines():
    out = []
    for i in range(5):
        out.append(line({"id": f"p{i}", "prompt": f"How do I return the strimmer on day {i}?",
                         "chosen": "Bring it to the shed on Thursday evening, cleaned.",
                         "rejected": "Leave it by the gate.", "who": f"v{i % 3}", "src": "kiosk"}))
    return "\n".join(out) + "\n"


def chat_lines():
    out = []
    for i in range(4):
        out.append(line({"k": f"h{i}", "turns": [
            {"role": "system", "content": "You answer questions for a tool-lending shed."},
            {"role": "user", "content": EVAL_COPY if i == 0 else f"Is the wheelbarrow back yet ({i})?"}],
            "answers": [{"body": "Yes.", "model": "m1"}, {"body": "Not yet, try tomorrow.", "model": "m2"}],
            "order": [1, 0], "who": "v1", "meta": {"contact": "desk@example.net"}}))
    return "\n".join(out) + "\n"


def one_based_lines():
    out = []
    for i in range(4):
        out.append(line({"id": f"o{i}", "prompt": f"Which saw for job {i}?", "candidates": ["Tenon.", "Coping."],
                         "choice": 1 + i % 2}))
    return "\n".join(out) + "\n"


def ordered_lines():
    out = []
    for i in range(3):
        out.append(line({"id": f"d{i}", "prompt": f"Pick a glue for repair {i}.", "candidates": ["PVA", "Epoxy", "Hide glue"],
                         "order": [2, 0, 1], "ts": "2026-03-01T10:00:00Z"}))
    return "\n".join(out) + "\n"


def write(name, header, body):
    with open(os.path.join(HERE, name), "wb") as f:
        f.write(bytes(header) + body)


def main():
    write("choice", [0x00, 0x00], choice_lines().encode())
    write("choice_mask_threads", [0x30, 0x11], choice_lines().encode())
    write("choice_rebalance_tight", [0xC0, 0x03], choice_lines().encode())
    write("ranked", [0x01, 0x00], ranked_lines().encode())
    write("pairwise", [0x02, 0x44], pairwise_lines().encode())
    write("chat", [0x23, 0x08], chat_lines().encode())
    write("one_based", [0x04, 0x00], one_based_lines().encode())
    write("ordered", [0x05, 0x80], ordered_lines().encode())
    write("two_inputs", [0x08, 0x20], (choice_lines() + ranked_lines()).encode())
    bad = (b"\xff\x22\n{\"id\": \"x\", \"prompt\": \"caf\xe9\"}\n\r\n   \n{\"id\":1}\n[1,2]\n{\"prompt\":"
           b"\n\xef\xbb\xbf{}\n" + b"[" * 200 + b"\n")
    write("malformed", [0x00, 0x10], b"\xef\xbb\xbf" + bad)
    write("crlf", [0x10, 0x10], choice_lines().replace("\n", "\r\n").encode())
    # Tight limits (max_line_bytes 512): a line of 600 digits and a line of 628 spaces are records
    # (line_too_long), not blank lines.
    write("tight_long_lines", [0x80, 0x00], choice_lines().encode() + b"0" * 600 + b"\n" + b" " * 628 + b"\n")


if __name__ == "__main__":
    main()
