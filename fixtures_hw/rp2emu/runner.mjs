#!/usr/bin/env node
// MicroPython-on-rp2040js runner (glowtrace's copy of the bundle's run-mpy.mjs, which
// ../shared/rp2emu/README.md describes; node resolves rp2040js from this folder's
// node_modules, `npm ci` here). The boot ROM and the UF2 are read from the bundle:
// --bundle DIR (default $GLOWTRACE_RP2EMU or ../../../shared/rp2emu from here).
// MicroPython-on-rp2040js runner.
//  - loads a UF2 into emulated flash (optionally a saved flash image), runs the RP2040 core
//  - bridges USB CDC (the MicroPython REPL) to a TCP socket on 127.0.0.1:<port> (default 5555)
//    (use socat to turn it into a pty for mpremote), or to stdin/stdout with --stdio
//  - emulates flash erase/program by hooking the bootrom's flash_range_erase / flash_range_program
//    (rp2040js's SSI does not emulate a flash chip), so littlefs works and can persist (--flash-file)
//  - control socket on 127.0.0.1:<port+1>, line commands:
//      adc <ch> <raw12>                  set ADC channel value (0..4)
//      adcsine <ch> <mid> <amp> <hz>     ADC channel follows a sine of emulated time
//      adcramp <ch>                      ADC channel returns an incrementing counter (0..4095) per conversion
//      adctable <json>                   (glowtrace) ADC channel follows a table of codes against the
//                                        time since a gate pin went high: {"ch", "gate", "off",
//                                        "t_us": [...], "code": [...]}; "off" while the gate is low
//                                        (the heater model's curve, replayed in emulated time)
//      adcstall <0|1> [gate after_us]    (glowtrace) conversions never complete (a converter fault);
//                                        with a gate pin: once it has been high after_us
//      hang                              (glowtrace) the core stops in a tight loop with interrupts
//                                        off (a firmware hang): only the watchdog ends it
//      gpio [pin]                        print GPIO output state(s)
//      setin <pin> <0|1>                 drive a GPIO input (glowtrace: kept across resets)
//      stats                             emulated time, wall time, speed ratio, instructions
//      saveflash [file]                  write flash image
//      reset                             hard reset (keeps flash)
//      quit
//  - GPIO output changes are logged to stderr (--gpio-log) and to connected control clients.
//  - watchdog trigger / machine.reset() -> hard reset of a fresh emulated chip (flash preserved).
import fs from 'fs';
import net from 'net';
import { Simulator, USBCDC, ConsoleLogger, LogLevel, GPIOPinState } from 'rp2040js';
import path from 'path';
import { pathToFileURL, fileURLToPath } from 'url';

const argv = process.argv.slice(2);
function opt(name, def) {
  const i = argv.indexOf('--' + name);
  if (i < 0) return def;
  const v = argv[i + 1];
  return v === undefined || v.startsWith('--') ? true : v;
}
const here = path.dirname(fileURLToPath(import.meta.url));
const bundle = opt('bundle', process.env.GLOWTRACE_RP2EMU || path.join(here, '..', '..', '..', 'shared', 'rp2emu'));
const { bootromB1 } = await import(pathToFileURL(path.join(bundle, 'bootrom.mjs')).href);
const uf2File = opt('uf2', path.join(bundle, 'micropython-1.26.1-rp2-pico.uf2'));
const flashFile = opt('flash-file', null); // persisted 2MB flash image (loaded if exists, saved on exit/reset)
const port = parseInt(opt('port', '5555'));
const stdio = !!opt('stdio', false);
const gpioLog = !!opt('gpio-log', false);
const quiet = !!opt('quiet', false);
const FLASH_START = 0x10000000;

function log(...a) {
  if (!quiet) console.error('[emu]', ...a);
}

function loadUF2(mcu, file) {
  const buf = fs.readFileSync(file);
  let n = 0;
  for (let off = 0; off + 512 <= buf.length; off += 512) {
    const b = buf.subarray(off, off + 512);
    const dv = new DataView(b.buffer, b.byteOffset, 512);
    if (dv.getUint32(0, true) !== 0x0a324655 || dv.getUint32(4, true) !== 0x9e5d5157) continue;
    const flags = dv.getUint32(8, true);
    if (flags & 1) continue; // not main flash
    const addr = dv.getUint32(12, true);
    const size = dv.getUint32(16, true);
    mcu.flash.set(b.subarray(32, 32 + size), addr - FLASH_START);
    n++;
  }
  return n;
}

// ---- bootrom patch: replace flash_range_erase ('RE') and flash_range_program ('RP') with BKPT stubs
const BKPT_ERASE = 0xe1, BKPT_PROGRAM = 0xe2;
function patchBootrom(rom32) {
  const rom = new DataView(rom32.buffer);
  const funcTable = rom.getUint16(0x14, true);
  const found = {};
  for (let p = funcTable; ; p += 4) {
    const code = rom.getUint16(p, true);
    if (!code) break;
    const fn = rom.getUint16(p + 2, true);
    found[String.fromCharCode(code & 0xff, code >> 8)] = fn;
  }
  for (const [name, bk] of [['RE', BKPT_ERASE], ['RP', BKPT_PROGRAM]]) {
    const a = found[name] & ~1;
    rom.setUint16(a, 0xbe00 | bk, true); // bkpt #bk
    rom.setUint16(a + 2, 0x4770, true); // bx lr
  }
  return found;
}
const patchedRom = new Uint32Array(bootromB1);

// Fix for rp2040js bug (adc.ts `set activeChannel`: masks with CS_AINSEL_SHIFT instead of CS_AINSEL_MASK),
// which makes ADC round-robin stay on channel 0 for channels 1..3.
let adcProtoPatched = false;
function patchADC(adc) {
  if (adcProtoPatched) return;
  const proto = Object.getPrototypeOf(adc);
  Object.defineProperty(proto, 'activeChannel', {
    configurable: true,
    get() { return (this.cs >> 12) & 0x7; },
    set(ch) { this.cs = (this.cs & ~(0x7 << 12)) | ((ch & 0x7) << 12); },
  });
  adcProtoPatched = true;
}
const romFuncs = patchBootrom(patchedRom);

let sim, mcu, cdc;
let savedFlash = null;
if (flashFile && fs.existsSync(flashFile)) savedFlash = new Uint8Array(fs.readFileSync(flashFile));
const adcFns = [null, null, null, null, null];
const adcValues = [0, 0, 0, 0, 0];
const gateHighSince = {}; // pin -> emulated ns it went high (null: low)
const pinInputs = {}; // pin -> input level driven from outside (setin), kept across resets
let adcConversions = 0;
let adcStall = null; // (glowtrace) adcstall: {gate, afterUs} or null
const HANG_AT = 0x20041f00; // (glowtrace) hang: a `b .` in scratch RAM
const inputQueue = [];
let cdcConnected = false;
let clients = new Set();
let ctlClients = new Set();
let bootCount = 0;
let pendingReset = false;
let lastResetReason = 0;
let totalInstr = 0;
const wallStart = Date.now();
let emuBaseNanos = 0; // emulated nanos accumulated across resets

function ctlBroadcast(s) {
  for (const c of ctlClients) c.write(s + '\n');
}

function boot() {
  if (mcu) {
    emuBaseNanos += sim.clock.nanos;
    savedFlash = new Uint8Array(mcu.flash);
  }
  bootCount++;
  sim = new Simulator();
  mcu = sim.rp2040;
  mcu.logger = new ConsoleLogger(LogLevel.Error);
  mcu.loadBootrom(patchedRom); // note: resets and erases flash
  if (savedFlash) mcu.flash.set(savedFlash);
  const nblocks = loadUF2(mcu, uf2File); // firmware always (re)loaded from UF2
  log(`boot #${bootCount}: loaded ${nblocks} UF2 blocks from ${uf2File}${savedFlash ? ' (+saved flash)' : ''}`);

  mcu.onBreak = (code) => {
    const r = mcu.core.registers;
    if (code === BKPT_ERASE) {
      // flash_range_erase(uint32_t addr, size_t count, uint32_t block_size, uint8_t block_cmd)
      const addr = r[0] >>> 0, count = r[1] >>> 0;
      mcu.flash.fill(0xff, addr, addr + count);
    } else if (code === BKPT_PROGRAM) {
      // flash_range_program(uint32_t addr, const uint8_t *data, size_t count)
      const addr = r[0] >>> 0, data = r[1] >>> 0, count = r[2] >>> 0;
      for (let i = 0; i < count; i++) mcu.flash[addr + i] &= mcu.readUint8(data + i);
    } else {
      log(`BKPT #${code} at PC=0x${(mcu.core.PC >>> 0).toString(16)} - stopping`);
      sim.stop();
      process.exit(3);
    }
  };

  // ADC: default reads channelValues; allow waveform functions per channel
  if (!opt('no-adc-fix', false)) patchADC(mcu.adc);
  for (let i = 0; i < 5; i++) mcu.adc.channelValues[i] = adcValues[i];
  mcu.adc.onADCRead = (channel) => {
    if (adcStall) { // never completes: the converter has stopped
      const since = adcStall.gate == null ? 0 : gateHighSince[adcStall.gate];
      if (since != null && (emuBaseNanos + sim.clock.nanos - since) / 1000 >= adcStall.afterUs) return;
    }
    adcConversions++;
    const fn = adcFns[channel];
    const v = fn ? fn(emuBaseNanos + sim.clock.nanos) : adcValues[channel];
    mcu.adc.channelValues[channel] = Math.max(0, Math.min(4095, Math.round(v)));
    mcu.adc.currentChannel = channel;
    mcu.adc.sampleAlarm.schedule(mcu.adc.sampleTime * 1000);
  };

  // Watchdog -> fresh chip, keep flash
  const wd = mcu.findPeripheral(0x40058000);
  wd.reason = lastResetReason; // WATCHDOG REASON register survives the (emulated) reboot
  wd.onWatchdogTrigger = () => {
    lastResetReason = wd.reason;
    // stop the (periodic) watchdog alarm, otherwise it re-fires forever inside clock.tick()
    wd.alarm.enable = false;
    wd.timer.enable = false;
    if (pendingReset) return;
    log('watchdog triggered -> reset');
    ctlBroadcast(`event watchdog-reset t_us=${Math.round((emuBaseNanos + sim.clock.nanos) / 1000)}`);
    pendingReset = true;
    sim.stop();
  };

  // GPIO observation
  mcu.gpio.forEach((pin, i) => {
    pin.addListener((state, old) => {
      const nowNs = emuBaseNanos + sim.clock.nanos;
      if (state === GPIOPinState.High && old !== GPIOPinState.High) gateHighSince[i] = nowNs;
      if (state !== GPIOPinState.High) gateHighSince[i] = null;
      const msg = `gpio ${i} ${GPIOPinState[state]} (was ${GPIOPinState[old]}) t_us=${Math.round((emuBaseNanos + sim.clock.nanos) / 1000)}`;
      if (gpioLog) log(msg);
      ctlBroadcast('event ' + msg);
    });
  });

  cdc = new USBCDC(mcu.usbCtrl);
  cdcConnected = false;
  cdc.onDeviceConnected = () => {
    cdcConnected = true;
    log('USB CDC connected');
  };
  cdc.onSerialData = (value) => {
    const b = Buffer.from(value);
    if (stdio) process.stdout.write(b);
    for (const c of clients) c.write(b);
  };

  for (const [pin, v] of Object.entries(pinInputs)) mcu.gpio[+pin].setInputValue(v);
  mcu.core.PC = 0x10000000;
}

function feedInput() {
  if (!cdcConnected) return;
  while (inputQueue.length && !cdc.txFIFO.full) cdc.sendSerialByte(inputQueue.shift());
}

const cycleNanos = 1e9 / 125000000;
function runSlice() {
  if (pendingReset) {
    pendingReset = false;
    boot();
  }
  const { clock } = sim;
  sim.stopped = false;
  const tEnd = Date.now() + 20;
  while (!sim.stopped && Date.now() < tEnd) {
    feedInput();
    for (let i = 0; i < 100000 && !sim.stopped; i++) {
      if (mcu.core.waiting) {
        const n = clock.nanosToNextAlarm;
        clock.tick(n);
        i += n / cycleNanos;
      } else {
        const cycles = mcu.core.executeInstruction();
        clock.tick(cycles * cycleNanos);
        totalInstr++;
      }
    }
  }
  setImmediate(runSlice);
}

function stats() {
  const emuS = (emuBaseNanos + sim.clock.nanos) / 1e9;
  const wallS = (Date.now() - wallStart) / 1000;
  return `emu_s=${emuS.toFixed(3)} wall_s=${wallS.toFixed(3)} ratio=${(emuS / wallS).toFixed(3)} instr=${totalInstr} MIPS=${(totalInstr / wallS / 1e6).toFixed(2)} boots=${bootCount} adc_conversions=${adcConversions}`;
}

function saveFlash(file) {
  fs.writeFileSync(file, mcu.flash.subarray(0, 2 * 1024 * 1024));
}

// ---- serial bridge
if (stdio) {
  if (process.stdin.isTTY) process.stdin.setRawMode(true);
  process.stdin.on('data', (chunk) => {
    if (chunk[0] === 24) shutdown(); // Ctrl-X
    for (const b of chunk) inputQueue.push(b);
  });
} else {
  net
    .createServer((sock) => {
      clients.add(sock);
      log('serial client connected');
      sock.on('data', (d) => {
        for (const b of d) inputQueue.push(b);
      });
      sock.on('close', () => clients.delete(sock));
      sock.on('error', () => clients.delete(sock));
    })
    .listen(port, '127.0.0.1', () => log(`serial (USB CDC) on tcp 127.0.0.1:${port}`));
}

// ---- control socket
net
  .createServer((sock) => {
    ctlClients.add(sock);
    let buf = '';
    sock.on('data', (d) => {
      buf += d.toString();
      let nl;
      while ((nl = buf.indexOf('\n')) >= 0) {
        const line = buf.slice(0, nl).trim();
        buf = buf.slice(nl + 1);
        sock.write(handleCmd(line) + '\n');
      }
    });
    sock.on('close', () => ctlClients.delete(sock));
    sock.on('error', () => ctlClients.delete(sock));
  })
  .listen(port + 1, '127.0.0.1', () => log(`control on tcp 127.0.0.1:${port + 1}`));

function handleCmd(line) {
  const [cmd, ...a] = line.split(/\s+/);
  try {
    switch (cmd) {
      case 'adc':
        adcFns[+a[0]] = null;
        adcValues[+a[0]] = +a[1];
        return 'ok';
      case 'adcsine': {
        const [ch, mid, amp, hz] = a.map(Number);
        adcFns[ch] = (ns) => mid + amp * Math.sin(2 * Math.PI * hz * ns * 1e-9);
        return 'ok';
      }
      case 'adctable': {
        const t = JSON.parse(a.join(' '));
        const ts = t.t_us, cs = t.code;
        adcFns[t.ch] = (ns) => {
          const since = gateHighSince[t.gate];
          if (since == null) return t.off;
          const us = (ns - since) / 1000;
          if (us <= ts[0]) return cs[0];
          if (us >= ts[ts.length - 1]) return cs[cs.length - 1];
          let lo = 0, hi = ts.length - 1;
          while (hi - lo > 1) {
            const mid = (lo + hi) >> 1;
            if (ts[mid] <= us) lo = mid; else hi = mid;
          }
          return cs[lo] + (cs[hi] - cs[lo]) * (us - ts[lo]) / (ts[hi] - ts[lo]);
        };
        return 'ok';
      }
      case 'adcramp': {
        let k = 0;
        adcFns[+a[0]] = () => k++ & 0xfff;
        return 'ok';
      }
      case 'adcstall':
        adcStall = +a[0] ? { gate: a.length > 1 ? +a[1] : null, afterUs: +(a[2] || 0) } : null;
        // the conversion left hanging completes now: the converter works again
        if (!adcStall && mcu.adc.busy) mcu.adc.sampleAlarm.schedule(mcu.adc.sampleTime * 1000);
        return 'ok';
      case 'hang': {
        mcu.core.PM = true; // interrupts off: nothing but the watchdog runs
        mcu.writeUint16(HANG_AT, 0xe7fe); // b .
        mcu.core.PC = HANG_AT;
        return `ok t_us=${Math.round((emuBaseNanos + sim.clock.nanos) / 1000)}`;
      }
      case 'gpio':
        if (a.length) {
          const p = mcu.gpio[+a[0]];
          return `gpio ${a[0]} ${GPIOPinState[p.value]} out=${+p.outputValue} oe=${+p.outputEnable} func=${p.functionSelect}`;
        }
        return `gpioValues=0x${(mcu.gpioValues >>> 0).toString(16)}`;
      case 'setin':
        // (glowtrace) kept and applied again at every boot: what drives a pin
        // from outside (a pull-up resistor, a switch) outlives a reset
        pinInputs[+a[0]] = !!+a[1];
        mcu.gpio[+a[0]].setInputValue(pinInputs[+a[0]]);
        return 'ok';
      case 'stats':
        return stats();
      case 'saveflash':
        saveFlash(a[0] || flashFile || 'flash.bin');
        return 'ok';
      case 'reset':
        lastResetReason = 0;
        pendingReset = true;
        sim.stop();
        return 'ok';
      case 'quit':
        setTimeout(shutdown, 10);
        return 'bye';
      default:
        return 'err unknown command';
    }
  } catch (e) {
    return 'err ' + e.message;
  }
}

function shutdown() {
  log(stats());
  if (flashFile) {
    saveFlash(flashFile);
    log(`flash saved to ${flashFile}`);
  }
  process.exit(0);
}
process.on('SIGINT', shutdown);
process.on('SIGTERM', shutdown);

log(`bootrom funcs: RE=0x${romFuncs.RE.toString(16)} RP=0x${romFuncs.RP.toString(16)} (patched with BKPT)`);
boot();
setInterval(() => { if (!quiet && opt('stats-every', false)) log(stats()); }, 5000).unref();
runSlice();
