#!/usr/bin/env python3
"""Check a .wasm file against the static rules of exobound ABI v1.

Why this exists: an author who builds a module without the Rust SDK (in C,
say) wants to know before handing it to anyone whether the host will load
it. This script reads the binary itself (the format is simple; no
WebAssembly library is needed) and checks what the host checks before it
instantiates anything, as docs/abi.md describes:

- exactly one `exobound:abi` section, holding ASCII "major.minor.patch"
  with major 1;
- exactly one `exobound:manifest` section of at most 64 KiB, a MessagePack
  map with the 13 manifest keys and the types docs/abi.md lists;
- no imports at all;
- the exports `memory`, `exobound_alloc`, `exobound_free`, `exobound_init`,
  `exobound_last_error` and the batch exports of every declared role, each
  with its ABI v1 signature (the host itself still loads a module without
  `exobound_free`; ABI v1 requires it).

It cannot run the module; the engine's `vet` does that.

Usage: python3 check_module.py MODULE.wasm [--show-manifest]
Exit status 0 when every check passes, 1 otherwise.
"""

import json
import struct
import sys

MANIFEST_CAP = 64 * 1024  # bytes
I32 = 0x7F
VALTYPES = {0x7F: "i32", 0x7E: "i64", 0x7D: "f32", 0x7C: "f64", 0x7B: "v128", 0x70: "funcref", 0x6F: "externref"}

COMMON_EXPORTS = {
    "exobound_alloc": ((I32, I32), (I32,)),
    "exobound_free": ((I32, I32, I32), ()),
    "exobound_init": ((I32, I32), (I32,)),
    "exobound_last_error": ((I32, I32), (I32,)),
}
BATCH = ((I32, I32, I32), (I32,))
ROLE_EXPORTS = {
    "source": ["exobound_release_rate", "exobound_launch"],
    "loss": ["exobound_loss_rate"],
    "surface-interaction": ["exobound_land"],
    "reservoir-process": ["exobound_exchange"],
}
INPUTS = {
    "temperature", "cos-sza", "local-time", "position", "adsorbed", "bulk-abundance",
    "helio-distance", "solar-wind-flux", "meteoroid-factor", "altitude", "speed",
    "sun-radial-velocity", "sunlight", "impact-velocity", "mass", "time",
}
CHECKS = {"release-rate", "loss-rate", "exchange", "mean-launch-speed", "stick-fraction"}


class Bytes:
    """A cursor over a byte string with WebAssembly's LEB128 readers."""

    def __init__(self, data, pos=0, end=None):
        self.data, self.pos, self.end = data, pos, len(data) if end is None else end

    def byte(self):
        if self.pos >= self.end:
            raise ValueError("unexpected end of data")
        b = self.data[self.pos]
        self.pos += 1
        return b

    def uleb(self):
        result, shift = 0, 0
        while True:
            b = self.byte()
            result |= (b & 0x7F) << shift
            shift += 7
            if b < 0x80:
                return result

    def take(self, n):
        if self.pos + n > self.end:
            raise ValueError("unexpected end of data")
        out = self.data[self.pos:self.pos + n]
        self.pos += n
        return out

    def name(self):
        return self.take(self.uleb()).decode("utf-8")


def parse_wasm(data):
    """Sections of a module: custom sections, types, imports, functions, memories, exports."""
    if data[:4] != b"\0asm" or data[4:8] != b"\x01\0\0\0":
        raise ValueError("not a WebAssembly 1.0 binary")
    r = Bytes(data, 8)
    mod = {"custom": [], "types": [], "imports": [], "funcs": [], "memories": [], "exports": []}
    while r.pos < r.end:
        sid = r.byte()
        size = r.uleb()
        s = Bytes(data, r.pos, r.pos + size)
        r.pos += size
        if sid == 0:
            name = s.name()
            mod["custom"].append((name, data[s.pos:s.end]))
        elif sid == 1:
            for _ in range(s.uleb()):
                if s.byte() != 0x60:
                    raise ValueError("unsupported type form")
                params = tuple(s.byte() for _ in range(s.uleb()))
                results = tuple(s.byte() for _ in range(s.uleb()))
                mod["types"].append((params, results))
        elif sid == 2:
            for _ in range(s.uleb()):
                module, field, kind = s.name(), s.name(), s.byte()
                mod["imports"].append((module, field, kind))
                if kind == 0:
                    mod["funcs"].append(s.uleb())  # imported function: its type index
                else:
                    break  # the kind's descriptor is not needed: any import fails the check
        elif sid == 3:
            for _ in range(s.uleb()):
                mod["funcs"].append(s.uleb())
        elif sid == 5:
            for _ in range(s.uleb()):
                flags = s.uleb()
                minimum = s.uleb()
                maximum = s.uleb() if flags & 1 else None
                mod["memories"].append((flags, minimum, maximum))
        elif sid == 7:
            for _ in range(s.uleb()):
                name, kind, index = s.name(), s.byte(), s.uleb()
                mod["exports"].append((name, kind, index))
    return mod


def unpack(data):
    """Decode one MessagePack value (the subset a manifest uses, plus ints)."""
    r = Bytes(data)

    def be(n):
        return int.from_bytes(r.take(n), "big")

    def value():
        t = r.byte()
        if t <= 0x7F:
            return t
        if t >= 0xE0:
            return t - 256
        if 0x80 <= t <= 0x8F:
            return pairs(t & 0x0F)
        if 0x90 <= t <= 0x9F:
            return [value() for _ in range(t & 0x0F)]
        if 0xA0 <= t <= 0xBF:
            return r.take(t & 0x1F).decode("utf-8")
        simple = {
            0xC0: lambda: None, 0xC2: lambda: False, 0xC3: lambda: True,
            0xCA: lambda: struct.unpack(">f", r.take(4))[0],
            0xCB: lambda: struct.unpack(">d", r.take(8))[0],
            0xCC: lambda: be(1), 0xCD: lambda: be(2), 0xCE: lambda: be(4), 0xCF: lambda: be(8),
            0xD9: lambda: r.take(be(1)).decode("utf-8"),
            0xDA: lambda: r.take(be(2)).decode("utf-8"),
            0xDB: lambda: r.take(be(4)).decode("utf-8"),
            0xDC: lambda: [value() for _ in range(be(2))],
            0xDD: lambda: [value() for _ in range(be(4))],
            0xDE: lambda: pairs(be(2)),
            0xDF: lambda: pairs(be(4)),
        }
        if t in simple:
            return simple[t]()
        raise ValueError("MessagePack type byte 0x%02x is not used by manifests" % t)

    def pairs(n):
        out = {}
        for _ in range(n):
            k = value()
            if not isinstance(k, str):
                raise ValueError("map key %r is not a string" % (k,))
            if k in out:
                raise ValueError("map key %r appears twice" % k)
            out[k] = value()
        return out

    v = value()
    if r.pos != len(data):
        raise ValueError("%d bytes after the MessagePack value" % (len(data) - r.pos))
    return v


def is_str(v):
    return isinstance(v, str)


def is_num(v):
    return isinstance(v, float) or (isinstance(v, int) and not isinstance(v, bool))


def check_manifest(m, problems):
    """The manifest's keys and types, as docs/abi.md lists them."""
    if not isinstance(m, dict):
        problems.append("manifest: not a map")
        return
    want = {
        "name": is_str, "version": is_str, "description": is_str,
        "roles": lambda v: isinstance(v, list) and all(x in ROLE_EXPORTS for x in v) and v,
        "authors": lambda v: isinstance(v, list) and all(map(is_str, v)),
        "institution": is_str, "licence": is_str, "law_source": is_str,
        "draws_on": lambda v: v in (None, "adsorbed", "bulk"),
        "ledger_label": is_str,
        "inputs": lambda v: isinstance(v, list) and all(x in INPUTS for x in v),
        "parameters": lambda v: isinstance(v, list),
        "reference_points": lambda v: isinstance(v, list),
    }
    for key in m:
        if key not in want:
            problems.append("manifest: unknown key %r" % key)
    for key, ok in want.items():
        if key not in m:
            problems.append("manifest: missing key %r" % key)
        elif not ok(m[key]):
            problems.append("manifest: key %r has a wrong type or value: %r" % (key, m[key]))
    roles = m.get("roles") or []
    if "source" in roles and m.get("draws_on") is None:
        problems.append("manifest: a source must say draws_on: adsorbed or bulk")
    if "source" not in roles and m.get("draws_on") is not None:
        problems.append("manifest: draws_on is set but the module is no source")
    name = m.get("name")
    if is_str(name) and not (name and all(c.isascii() and (c.isalnum() or c in "-_") for c in name)):
        problems.append("manifest: name %r must be non-empty ASCII letters, digits, '-' or '_'" % name)
    version = m.get("version")
    if is_str(version) and not (len(version.split(".")) == 3 and all(p.isdigit() for p in version.split("."))):
        problems.append("manifest: version %r is not major.minor.patch" % version)
    names = [p.get("name") for p in m.get("parameters") or [] if isinstance(p, dict)]
    for n in set(x for x in names if names.count(x) > 1):
        problems.append("manifest: parameter %r is declared twice" % n)
    for i, p in enumerate(m.get("parameters") or []):
        where = "manifest: parameters[%d]" % i
        if not isinstance(p, dict) or set(p) != {"name", "unit", "description", "default", "min", "max", "choices", "default_origin"}:
            problems.append("%s: must be a map with exactly name, unit, description, default, min, max, choices, default_origin" % where)
            continue
        if not (is_str(p["name"]) and is_str(p["unit"]) and is_str(p["description"]) and is_str(p["default_origin"])):
            problems.append("%s: name, unit, description and default_origin must be strings" % where)
        if p["choices"]:
            if not (all(map(is_str, p["choices"])) and p["min"] is None and p["max"] is None
                    and (p["default"] is None or p["default"] in p["choices"])):
                problems.append("%s: a choice has string options, nil min and max, and a default among its options or nil" % where)
        elif not (is_num(p["min"]) and is_num(p["max"]) and p["min"] <= p["max"]
                  and (p["default"] is None or (is_num(p["default"]) and p["min"] <= p["default"] <= p["max"]))):
            problems.append("%s: a number has float min <= max and a default in range or nil" % where)
    for i, rp in enumerate(m.get("reference_points") or []):
        where = "manifest: reference_points[%d]" % i
        if not isinstance(rp, dict) or set(rp) != {"description", "check", "parameters", "input", "expected", "tolerance", "source"}:
            problems.append("%s: must be a map with exactly description, check, parameters, input, expected, tolerance, source" % where)
            continue
        if rp["check"] not in CHECKS:
            problems.append("%s: unknown check %r" % (where, rp["check"]))
        pair = lambda x, okv: isinstance(x, list) and len(x) == 2 and is_str(x[0]) and okv(x[1])
        if not all(pair(x, lambda v: is_num(v) or is_str(v)) for x in rp["parameters"]):
            problems.append("%s: parameters must be [name, number or text] pairs" % where)
        if not all(pair(x, is_num) for x in rp["input"]):
            problems.append("%s: input must be [field, number] pairs" % where)
        if not (is_num(rp["expected"]) and is_num(rp["tolerance"]) and is_str(rp["source"]) and is_str(rp["description"])):
            problems.append("%s: expected and tolerance are numbers, description and source strings" % where)


def sig(t):
    return "(%s) -> (%s)" % (", ".join(VALTYPES.get(x, hex(x)) for x in t[0]), ", ".join(VALTYPES.get(x, hex(x)) for x in t[1]))


def main(argv):
    if len(argv) < 2:
        print(__doc__.strip().splitlines()[-2])
        return 2
    data = open(argv[1], "rb").read()
    problems = []
    mod = parse_wasm(data)
    print("%s: %d bytes" % (argv[1], len(data)))

    print("custom sections:", ", ".join("%s (%d bytes)" % (n, len(b)) for n, b in mod["custom"]) or "none")
    abi = [b for n, b in mod["custom"] if n == "exobound:abi"]
    if len(abi) != 1:
        problems.append("expected exactly one exobound:abi section, found %d" % len(abi))
    else:
        text = abi[0].decode("ascii", "replace")
        parts = text.split(".")
        if len(parts) != 3 or not all(p.isdigit() for p in parts):
            problems.append("exobound:abi holds %r, not ASCII major.minor.patch" % text)
        elif int(parts[0]) != 1:
            problems.append("module ABI %s has major %s; this checker knows ABI 1.0.0" % (text, parts[0]))
        print("ABI version: %r" % text)

    manifest = None
    man = [b for n, b in mod["custom"] if n == "exobound:manifest"]
    if len(man) != 1:
        problems.append("expected exactly one exobound:manifest section, found %d" % len(man))
    elif len(man[0]) > MANIFEST_CAP:
        problems.append("manifest is %d bytes, over the cap of %d bytes" % (len(man[0]), MANIFEST_CAP))
    else:
        try:
            manifest = unpack(man[0])
            check_manifest(manifest, problems)
        except (ValueError, UnicodeDecodeError) as e:
            problems.append("manifest is not valid MessagePack: %s" % e)
    if manifest is not None and "--show-manifest" in argv:
        print(json.dumps(manifest, indent=2))

    if mod["imports"]:
        for module, field, kind in mod["imports"]:
            problems.append("import %s.%s (kind %d): ABI v1 allows no imports" % (module, field, kind))
    else:
        print("imports: none")

    exports = {name: (kind, index) for name, kind, index in mod["exports"]}
    print("exports:")
    for name, kind, index in mod["exports"]:
        if kind == 0:
            print("  %-24s func %s" % (name, sig(mod["types"][mod["funcs"][index]])))
        else:
            print("  %-24s %s" % (name, ["func", "table", "memory", "global"][kind] if kind < 4 else kind))
    if exports.get("memory", (None,))[0] != 2:
        problems.append("no memory exported as `memory`")
    elif mod["memories"]:
        flags = mod["memories"][0][0]
        if flags & 0x02:
            problems.append("memory is shared; ABI v1 wants an unshared memory")
        if flags & 0x04:
            problems.append("memory is 64-bit; ABI v1 addresses are 32-bit")
    want = dict(COMMON_EXPORTS)
    for role in (manifest or {}).get("roles") or []:
        for name in ROLE_EXPORTS.get(role, []):
            want[name] = BATCH
    for name, t in sorted(want.items()):
        got = exports.get(name)
        if got is None or got[0] != 0:
            problems.append("missing function export %s" % name)
        elif mod["types"][mod["funcs"][got[1]]] != t:
            problems.append("%s has signature %s, ABI v1 wants %s" % (name, sig(mod["types"][mod["funcs"][got[1]]]), sig(t)))
    declared = {n for r in (manifest or {}).get("roles") or [] for n in ROLE_EXPORTS.get(r, [])}
    for names in ROLE_EXPORTS.values():
        for name in names:
            if name in exports and name not in declared and manifest is not None:
                print("note: %s is exported but its role is not in the manifest's roles; "
                      "the host will never call it" % name)

    if problems:
        print("FAILED:")
        for p in problems:
            print("  - " + p)
        return 1
    print("OK: the module passes the static checks of ABI v1")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
