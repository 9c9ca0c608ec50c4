#!/usr/bin/env python3
"""Both Python decoders of frothline frames against the Rust decoder's verdicts.

The reference decoder is taken from docs/wire-protocol.md itself (the code block between
the `reference-decoder:begin` and `:end` markers of section 14), so the page's code is
what runs; the second decoder is decode_frames.py beside this file (the live-port test's).

Input, one JSON object per line on standard input:

    {"hex": "<the bytes between two delimiters>", "rust": "frame" | "unsupported" |
     "rejected", "code": <kind code>, "seq": <n>, "windows": [<window results>]?, "tips": [<tip reports>]?,
     "levels": [<probe levels>]?, "full": [<full windows>]?, "status": {<device status>}?}

For every line both decoders must reach the Rust verdict (accept as a frame of that kind
and seq, skip as unsupported, or reject), and for a Windows frame decode the same window
results (integers of the wire), for a TipHealth frame the same tip reports, for a Levels frame the same levels, for a FullWindows frame the same full windows, for a DeviceStatus frame the same status. Output: one JSON summary line; exit 1 on any mismatch.

    python3 check_decoders.py < cases.jsonl
"""

import json
import pathlib
import re
import sys
import types

HERE = pathlib.Path(__file__).resolve().parent
SPEC = HERE.parent.parent / "docs" / "wire-protocol.md"


def reference_decoder():
    text = SPEC.read_text(encoding="utf-8")
    m = re.search(r"<!-- reference-decoder:begin -->\s*```python\n(.*?)```\s*"
                  r"<!-- reference-decoder:end -->", text, re.S)
    if not m:
        sys.exit(f"{SPEC}: no reference decoder block between the markers")
    mod = types.ModuleType("spec_reference")
    exec(compile(m.group(1), f"{SPEC} section 14", "exec"), mod.__dict__)
    return mod


def verdict_ref(ref, raw):
    codes = {name: code for code, (name, _) in ref.BODIES.items()}
    try:
        d = ref.decode_frame(raw)
    except ValueError:
        return ("rejected", None, None, None)
    if d["kind"] == "unsupported":
        return ("unsupported", d["code"], d["seq"], None)
    return ("frame", codes[d["kind"]], d["seq"], d["body"])


def verdict_test(dec, raw):
    codes = {name: code for code, (name, _) in dec.KINDS.items()}
    try:
        d = dec.decode(raw)
    except ValueError:
        return ("rejected", None, None, None)
    if d["kind"] == "unsupported":
        return ("unsupported", d["code"], d["seq"], None)
    return ("frame", codes[d["kind"]], d["seq"], d["body"])


def main():
    ref = reference_decoder()
    sys.path.insert(0, str(HERE))
    import decode_frames as dec  # noqa: E402

    counts = {"cases": 0, "frame": 0, "unsupported": 0, "rejected": 0, "windows": 0,
              "mismatches": 0}
    shown = 0
    for line in sys.stdin:
        if not line.strip():
            continue
        case = json.loads(line)
        raw = bytes.fromhex(case["hex"])
        counts["cases"] += 1
        counts[case["rust"]] += 1
        want = case["rust"]
        for name, got in (("reference", verdict_ref(ref, raw)), ("test", verdict_test(dec, raw))):
            ok = got[0] == want
            if ok and want != "rejected":
                ok = got[1] == case["code"] and got[2] == case["seq"]
            if ok and want == "frame" and "windows" in case:
                ok = got[3] == case["windows"]
            if ok and want == "frame" and "tips" in case:
                ok = got[3] == case["tips"]
            if ok and want == "frame" and "levels" in case:
                ok = got[3] == case["levels"]
            if ok and want == "frame" and "full" in case:
                ok = got[3] == case["full"]
            if ok and want == "frame" and "status" in case:
                ok = got[3] == case["status"]
            if not ok:
                counts["mismatches"] += 1
                if shown < 10:
                    shown += 1
                    print(f"{name} decoder: {got[:3]} but Rust: {want} "
                          f"(code {case.get('code')}, seq {case.get('seq')}): {case['hex']}",
                          file=sys.stderr)
        if want == "frame" and "windows" in case:
            counts["windows"] += len(case["windows"])
    print(json.dumps({"summary": counts}), flush=True)
    return 1 if counts["mismatches"] else 0


if __name__ == "__main__":
    sys.exit(main())
