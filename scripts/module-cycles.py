#!/usr/bin/env python3
"""Fails when the modules of a crate import each other in a circle.

For each crate source tree given (default: core/src and host-tool/src), every file is a
module (`a/b.rs` and `a/b/mod.rs` are `a::b`; `lib.rs` and `main.rs` are the crate root).
A module depends on another when its code names it through `crate::...` or `super::...`
(in `use` lines or in paths), outside `#[cfg(test)]` modules: tests may reach anywhere.
A reference to `a::b::Item` counts as a dependency on the deepest module of the path that
exists. Parent modules that only declare their children (`mod x;`, `pub use`) do not count
as depending on them: a `mod.rs` re-exporting its children is the layer's front door.

Prints each strongly connected component of more than one module and exits 1 if there is
any, 0 otherwise. In the host tool it also checks the layers: the job folders (`offline`,
`live`, `field`, `report`, `synth`) use `shared` and never each other, and `shared` names
no job; a crossing is printed, and fails the run only with `--layers` (given after
`--self-test`, if both). `--self-test` first checks, on a small tree written to a temporary
folder, that a circle is found and that a one-way tree passes.
"""
import os
import re
import sys

PATH_RE = re.compile(r"\b(crate|super)((?:::[A-Za-z_][A-Za-z0-9_]*)+)")
USE_GROUP_RE = re.compile(r"\buse\s+(crate|super)((?:::[A-Za-z_][A-Za-z0-9_]*)*)::\{([^;]*)\}", re.S)


def module_of(root, path):
    rel = os.path.relpath(path, root)[:-3].split(os.sep)
    if rel[-1] in ("lib", "main") and len(rel) == 1:
        return ()
    if rel[-1] == "mod":
        rel = rel[:-1]
    return tuple(rel)


def strip_tests_and_comments(text):
    out, depth, skipping, pending = [], 0, None, False
    for line in text.splitlines():
        code = line.split("//", 1)[0]
        if skipping is None:
            if re.match(r"\s*#\[cfg\(test\)\]", code):
                pending = True
                continue
            if pending and re.match(r"\s*(pub(\([a-z]+\))?\s+)?mod\s+\w+\s*\{", code):
                skipping = depth
                depth += code.count("{") - code.count("}")
                pending = False
                continue
            pending = False
            out.append(code)
            depth += code.count("{") - code.count("}")
        else:
            depth += code.count("{") - code.count("}")
            if depth <= skipping:
                skipping = None
    return "\n".join(out)


def resolve(mod, base, segs, modules):
    if base == "crate":
        path = []
    else:
        path = list(mod)
        is_dir_module = modules[mod]
        if not is_dir_module and path:
            path = path[:-1]
    segs = list(segs)
    while segs and segs[0] == "super":
        segs.pop(0)
        path = path[:-1]
    best = None
    cand = list(path)
    if tuple(cand) in modules:
        best = tuple(cand)
    for s in segs:
        cand.append(s)
        if tuple(cand) in modules:
            best = tuple(cand)
        else:
            break
    return best


def graph(root):
    files = {}
    for d, _, fs in os.walk(root):
        for f in fs:
            if f.endswith(".rs"):
                p = os.path.join(d, f)
                files[module_of(root, p)] = p
    # A module is a "directory module" when it is mod.rs / lib.rs: `super` from it is its parent.
    modules = {m: os.path.basename(p) in ("mod.rs", "lib.rs", "main.rs") for m, p in files.items()}
    edges = {m: set() for m in modules}
    for m, p in files.items():
        text = strip_tests_and_comments(open(p, encoding="utf-8").read())
        refs = []
        for base, head, group in USE_GROUP_RE.findall(text):
            head_segs = [s for s in head.split("::") if s]
            for item in group.split(","):
                item = item.strip().split(" as ")[0]
                first = item.split("::")[0].strip("{} \n")
                if first and first != "self":
                    refs.append((base, head_segs + [first]))
                else:
                    refs.append((base, head_segs))
        for base, tail in PATH_RE.findall(text):
            refs.append((base, [s for s in tail.split("::") if s]))
        for base, segs in refs:
            target = resolve(m, base, segs, modules)
            if target is None or target == m:
                continue
            # A parent naming its own child (declaration, re-export) is not a dependency.
            if target[: len(m)] == m:
                continue
            edges[m].add(target)
    return edges


def cycles(edges):
    index, low, stack, on, out, counter = {}, {}, [], set(), [], [0]

    def visit(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in edges.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    sys.setrecursionlimit(10000)
    for v in edges:
        if v not in index:
            visit(v)
    return out


HOST_JOBS = ("offline", "live", "field", "report", "synth")


def layer_crossings(edges, jobs=HOST_JOBS):
    """Imports from one job folder into another, or from `shared` into a job."""
    out = []
    for m, targets in sorted(edges.items()):
        if not m or m[0] not in jobs + ("shared",):
            continue
        for t in sorted(targets):
            if t and t[0] in jobs and t[0] != m[0]:
                out.append((m, t))
    return out


def self_test():
    import tempfile

    def tree(files):
        d = tempfile.mkdtemp()
        for name, text in files.items():
            path = os.path.join(d, name)
            os.makedirs(os.path.dirname(path), exist_ok=True)
            with open(path, "w", encoding="utf-8") as f:
                f.write(text)
        return d

    circle = tree({
        "lib.rs": "mod a;\nmod b;\n",
        "a.rs": "use crate::b::B;\npub struct A;\n",
        "b/mod.rs": "pub struct B(crate::a::A);\n#[cfg(test)]\nmod tests {\n}\n",
    })
    one_way = tree({
        "lib.rs": "mod a;\nmod b;\n",
        "a.rs": "use crate::b::B;\npub struct A;\n",
        "b/mod.rs": "pub struct B;\n#[cfg(test)]\nmod tests {\n    use crate::a::A;\n}\n",
    })
    found = cycles(graph(circle))
    if found != [[("a",), ("b",)]]:
        print(f"self-test: the circle a <-> b was not found (got {found})")
        return False
    if cycles(graph(one_way)):
        print("self-test: a one-way tree (b -> a only in tests) was taken for a circle")
        return False
    layered = tree({
        "lib.rs": "mod live;\nmod synth;\nmod shared;\n",
        "shared/mod.rs": "pub mod gen;\n",
        "shared/gen.rs": "pub struct G;\n",
        "synth/mod.rs": "use crate::shared::gen::G;\n",
        "live/mod.rs": "use crate::synth::X;\nuse crate::shared::gen::G;\n",
    })
    crossing = layer_crossings(graph(layered))
    if crossing != [(("live",), ("synth",))]:
        print(f"self-test: the crossing live -> synth was not found (got {crossing})")
        return False
    return True


def main():
    args = sys.argv[1:]
    if args[:1] == ["--self-test"]:
        if not self_test():
            return 2
        args = args[1:]
    strict_layers = 1 if args[:1] == ["--layers"] else 0
    args = args[strict_layers:]
    roots = args or ["core/src", "host-tool/src"]
    bad = 0
    for root in roots:
        edges = graph(root)
        for comp in cycles(edges):
            bad += 1
            names = ["::".join(c) or "(crate root)" for c in comp]
            print(f"{root}: modules that import each other in a circle: {', '.join(names)}")
            for c in comp:
                inside = sorted("::".join(t) for t in edges[c] if t in comp)
                print(f"    {'::'.join(c) or '(crate root)'} -> {', '.join(inside)}")
        if root.rstrip("/").endswith("host-tool/src"):
            for m, t in layer_crossings(edges):
                bad += strict_layers
                print(f"{root}: {'::'.join(m)} imports {'::'.join(t)}: jobs use shared/, never each other")
    if bad == 0:
        print(f"no circles between modules in {', '.join(roots)}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
