// Run Python code under the real MicroPython interpreter (WebAssembly build), in Node.
//
//   node tools/upy/run.mjs [options] [FILE]      code from FILE, or from stdin
//
// Before the code runs, the firmware tree (default: firmware/ next to tools/)
// is copied into the interpreter's in-memory filesystem at /firmware and put
// on sys.path, so `import gaugecore.units` imports the very files the board runs.
// The code may use top-level `await` (it runs through runPythonAsync).
//
// Options:
//   --firmware DIR   copy DIR instead of the repository's firmware/
//   --data DIR       also copy DIR to /data (input files for batch runs)
//   --heap N         initial MicroPython heap in bytes (suffix k or m allowed);
//                    default 8m. This build grows its heap automatically when
//                    it runs out, so N is not a cap: measure memory with
//                    gc.mem_alloc() differences instead.
//   --pystack N      Python stack in words (default 16384; the package's 2048
//                    cannot compile a list literal of a few thousand items)
//
// Exit status: 0 on success; 1 when the code raised (the MicroPython traceback
// is on stderr); SystemExit(n) exits with n; 2 for usage or runner errors.

import fs from "node:fs";
import path from "node:path";
import { fileURLToPath } from "node:url";

const HERE = path.dirname(fileURLToPath(import.meta.url));
const SKIP = new Set(["node_modules", "__pycache__"]);

function usage(msg) {
    process.stderr.write("run.mjs: " + msg + "\n");
    process.stderr.write("usage: node run.mjs [--firmware DIR] [--data DIR] [--heap N] [--pystack N] [FILE]\n");
    process.exit(2);
}

function parseSize(text, what) {
    const m = /^(\d+)([kKmM]?)$/.exec(text || "");
    if (!m) usage("bad " + what + " " + JSON.stringify(text));
    const scale = { "": 1, k: 1024, m: 1024 * 1024 }[m[2].toLowerCase()];
    return parseInt(m[1], 10) * scale;
}

function parseArgs(argv) {
    const opts = {
        firmware: path.resolve(HERE, "..", "..", "firmware"),
        data: null,
        heap: 8 * 1024 * 1024,
        pystack: 16384,
        file: null,
    };
    for (let i = 0; i < argv.length; i++) {
        const a = argv[i];
        const next = () => {
            if (i + 1 >= argv.length) usage(a + " needs a value");
            return argv[++i];
        };
        if (a === "--firmware") opts.firmware = path.resolve(next());
        else if (a === "--data") opts.data = path.resolve(next());
        else if (a === "--heap") opts.heap = parseSize(next(), "heap size");
        else if (a === "--pystack") opts.pystack = parseSize(next(), "pystack size");
        else if (a === "-h" || a === "--help") usage("help");
        else if (a.startsWith("--")) usage("unknown option " + a);
        else if (opts.file === null) opts.file = a;
        else usage("more than one FILE");
    }
    return opts;
}

// Copy the host directory `src` into the interpreter's filesystem at `dst`.
function copyTree(FS, src, dst) {
    FS.mkdir(dst);
    for (const entry of fs.readdirSync(src, { withFileTypes: true })) {
        if (SKIP.has(entry.name) || entry.name.startsWith(".")) continue;
        const from = path.join(src, entry.name);
        const to = dst + "/" + entry.name;
        if (entry.isDirectory()) copyTree(FS, from, to);
        else if (entry.isFile()) FS.writeFile(to, fs.readFileSync(from));
    }
}

// Byte sink that forwards whole lines (and whatever is left at the end).
function sink(stream) {
    let buf = new Uint8Array(1 << 16);
    let n = 0;
    const flush = () => {
        if (n > 0) {
            stream.write(Buffer.from(buf.subarray(0, n)));
            n = 0;
        }
    };
    const put = (bytes) => {
        for (const b of bytes) {
            if (n === buf.length) flush();
            buf[n++] = b;
            if (b === 10) flush();
        }
    };
    return { put, flush };
}

const opts = parseArgs(process.argv.slice(2));
let code;
try {
    code = fs.readFileSync(opts.file === null ? 0 : opts.file, "utf8");
} catch (e) {
    usage("cannot read " + (opts.file || "stdin") + ": " + e.message);
}
if (!fs.existsSync(opts.firmware)) usage("no firmware directory " + opts.firmware);
if (opts.data !== null && !fs.existsSync(opts.data)) usage("no data directory " + opts.data);

const { loadMicroPython } = await import("@micropython/micropython-webassembly-pyscript");
const out = sink(process.stdout);
const err = sink(process.stderr);
const mp = await loadMicroPython({
    heapsize: opts.heap,
    pystack: opts.pystack,
    linebuffer: false,
    stdout: out.put,
    stderr: err.put,
});
copyTree(mp.FS, opts.firmware, "/firmware");
if (opts.data !== null) copyTree(mp.FS, opts.data, "/data");
mp.runPython("import sys\nsys.path.insert(0, '/firmware')\ndel sys\n");

let status = 0;
try {
    await mp.runPythonAsync(code);
} catch (e) {
    const text = String(e && e.message !== undefined ? e.message : e);
    if (e && e.type === "SystemExit") {
        // "SystemExit: 3" -> 3; bare sys.exit() -> 0; sys.exit("msg") -> msg, 1
        const arg = text.trimEnd().split("\n").pop().replace(/^SystemExit:? ?/, "");
        if (arg === "") status = 0;
        else if (/^-?\d+$/.test(arg)) status = parseInt(arg, 10) & 255;
        else {
            err.put(Buffer.from(arg + "\n"));
            status = 1;
        }
    } else {
        out.flush();
        err.put(Buffer.from(text.endsWith("\n") ? text : text + "\n"));
        status = e && e.name === "PythonError" ? 1 : 2;
    }
}
out.flush();
err.flush();
process.exitCode = status;
