// A persistent MicroPython interpreter (the real WebAssembly build) for the virtual board.
//
//   node tools/upy/repl.mjs [--heap N] [--pystack N]
//
// Reads one JSON request per line on stdin and answers one JSON line on stdout:
//   {"op": "exec", "code": "..."}   run code in the interpreter's __main__ (globals and
//                                   imported modules persist between requests)
//      -> {"ok": true, "out": BASE64, "err": BASE64}   err: MicroPython's traceback text
//   {"op": "reset"}                 soft reset: a fresh interpreter (new heap, no modules,
//                                   no globals); the files under /flash are carried over
//      -> {"ok": true}
//   {"op": "quit"}                  -> {"ok": true}, then exit
// Anything else -> {"ok": false, "error": "..."}.
//
// The board's filesystem is /flash in the interpreter's in-memory filesystem; it is the
// working directory, and '' on sys.path finds modules there, as on a board. Nothing of
// firmware/ is copied in: the board starts empty, as a freshly flashed one does.
// Used by tools/upy/vboard.py, which speaks MicroPython's raw-REPL protocol on a pty.

import path from "node:path";
import readline from "node:readline";
import { fileURLToPath } from "node:url";

const HERE = path.dirname(fileURLToPath(import.meta.url));
const FLASH = "/flash";

function parseSize(text) {
    const m = /^(\d+)([kKmM]?)$/.exec(text || "");
    if (!m) {
        process.stderr.write("repl.mjs: bad size " + JSON.stringify(text) + "\n");
        process.exit(2);
    }
    return parseInt(m[1], 10) * { "": 1, k: 1024, m: 1024 * 1024 }[m[2].toLowerCase()];
}

const opts = { heap: 8 * 1024 * 1024, pystack: 16384 };
const argv = process.argv.slice(2);
for (let i = 0; i < argv.length; i++) {
    if (argv[i] === "--heap") opts.heap = parseSize(argv[++i]);
    else if (argv[i] === "--pystack") opts.pystack = parseSize(argv[++i]);
    else {
        process.stderr.write("usage: node repl.mjs [--heap N] [--pystack N]\n");
        process.exit(2);
    }
}

const { loadMicroPython } = await import(
    path.join(HERE, "node_modules", "@micropython", "micropython-webassembly-pyscript", "micropython.mjs")
);

let outChunks = [];
const collect = (bytes) => outChunks.push(Buffer.from(bytes));

// Copy the tree `src` of filesystem A into filesystem B (same path).
function copyFs(A, B, src) {
    B.mkdir(src);
    for (const name of A.readdir(src)) {
        if (name === "." || name === "..") continue;
        const p = src + "/" + name;
        if (A.isDir(A.stat(p).mode)) copyFs(A, B, p);
        else B.writeFile(p, A.readFile(p));
    }
}

async function boot(previous) {
    const mp = await loadMicroPython({
        heapsize: opts.heap,
        pystack: opts.pystack,
        linebuffer: false,
        stdout: collect,
        stderr: collect,
    });
    if (previous) copyFs(previous.FS, mp.FS, FLASH);
    else mp.FS.mkdir(FLASH);
    mp.runPython("import os, sys\nos.chdir('" + FLASH + "')\nsys.path[:] = ['', '.frozen', '/lib']\ndel os, sys\n");
    outChunks = [];
    return mp;
}

function take() {
    const b = Buffer.concat(outChunks);
    outChunks = [];
    return b;
}

let mp = await boot(null);
const send = (obj) => process.stdout.write(JSON.stringify(obj) + "\n");

const rl = readline.createInterface({ input: process.stdin, crlfDelay: Infinity });
for await (const line of rl) {
    let req;
    try {
        req = JSON.parse(line);
    } catch (e) {
        send({ ok: false, error: "not JSON: " + e.message });
        continue;
    }
    if (req.op === "exec") {
        let err = "";
        outChunks = [];
        try {
            mp.runPython(String(req.code));
        } catch (e) {
            const text = String(e && e.message !== undefined ? e.message : e);
            err = text.endsWith("\n") ? text : text + "\n";
        }
        send({ ok: true, out: take().toString("base64"), err: Buffer.from(err).toString("base64") });
    } else if (req.op === "reset") {
        mp = await boot(mp);
        send({ ok: true });
    } else if (req.op === "quit") {
        send({ ok: true });
        break;
    } else {
        send({ ok: false, error: "unknown op " + JSON.stringify(req.op) });
    }
}
process.exit(0);
