"""Load a local page in headless Chromium through the DevTools protocol and report what the
browser saw, as JSON on stdout.

    python page_in_browser.py CHROMIUM PAGE_URL SCREENSHOT.png [WIDTH]

Reports: console errors and uncaught exceptions, every <img>, SVG <image> and <audio> with
whether it resolved and decoded, the summary tiles, every chart's numbers, the gallery's
word boxes and time axes as laid out (getBoundingClientRect), and whether a narrow window
(360 px) needs sideways scrolling. Writes a full-page screenshot.

The protocol client is websocket-client (PyPI, pinned in tests/reference/requirements.txt);
the rest is the standard library.
"""

import base64
import json
import os
import subprocess
import sys
import tempfile
import time
import urllib.request

import websocket

FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--remote-debugging-port=0",
    "--autoplay-policy=no-user-gesture-required",
]

COLLECT = r"""
(async () => {
  const settle = (el, ok, bad) => new Promise(res => {
    if (ok(el)) return res(true);
    const t = setTimeout(() => res(ok(el)), 15000);
    el.addEventListener(bad, () => { clearTimeout(t); res(false); }, {once: true});
  });
  const images = [];
  for (const img of document.querySelectorAll('img')) {
    await settle(img, i => i.complete && i.naturalWidth > 0, 'error');
    images.push({src: img.getAttribute('src'), alt: img.getAttribute('alt'),
                 ok: img.complete && img.naturalWidth > 0, width: img.naturalWidth});
  }
  for (const im of document.querySelectorAll('svg image')) {
    const href = im.getAttribute('href');
    const probe = new Image();
    const ok = await new Promise(res => {
      probe.onload = () => res(probe.naturalWidth > 0);
      probe.onerror = () => res(false);
      probe.src = new URL(href, document.baseURI).href;
    });
    const title = im.querySelector('title');
    images.push({src: href, alt: title ? title.textContent : null, ok, width: probe.naturalWidth});
  }
  const audio = [];
  for (const a of document.querySelectorAll('audio')) {
    if (a.readyState < 1) a.load();
    const ok = await new Promise(res => {
      if (a.readyState >= 1) return res(true);
      const t = setTimeout(() => res(false), 15000);
      a.addEventListener('loadedmetadata', () => { clearTimeout(t); res(true); }, {once: true});
      a.addEventListener('error', () => { clearTimeout(t); res(false); }, {once: true});
    });
    audio.push({src: a.getAttribute('src'), ok, duration: a.duration,
                error: a.error ? a.error.code : null, label: a.getAttribute('aria-label'),
                tabbable: a.tabIndex >= 0 && a.controls});
  }
  const tiles = {};
  for (const t of document.querySelectorAll('[data-figure]')) {
    const r = t.getBoundingClientRect();
    tiles[t.dataset.figure] = {value: t.dataset.value ?? null, text: t.textContent,
                               top: r.top + window.scrollY, visible: r.width > 0 && r.height > 0};
  }
  const charts = [];
  for (const box of document.querySelectorAll('figure[data-field]')) {
    const svg = box.querySelector('svg.hist');
    if (!svg) continue;
    charts.push({step: box.dataset.step ?? null, field: box.dataset.field,
                 group: box.dataset.group ?? null, kind: svg.dataset.kind,
                 edges: svg.dataset.edges ? JSON.parse(svg.dataset.edges) : null,
                 values: svg.dataset.values ? JSON.parse(svg.dataset.values) : null,
                 counts: JSON.parse(svg.dataset.counts),
                 bars: [...svg.querySelectorAll('rect.bar')].map(b => +b.dataset.count),
                 label: svg.getAttribute('aria-label')});
  }
  const steps = [...document.querySelectorAll('article.step')].map(s => ({
    name: s.dataset.step, ran: +s.dataset.ran, listed: +s.dataset.listed}));
  const gallery = [];
  for (const card of document.querySelectorAll('article.take-card')) {
    const panels = {};
    for (const p of card.querySelectorAll('g.panel')) {
      const axis = p.querySelector('rect.time-axis');
      const ar = axis.getBoundingClientRect();
      panels[p.dataset.panel] = {
        axis: {t0: +axis.dataset.t0, t1: +axis.dataset.t1, left: ar.left, width: ar.width},
        words: [...p.querySelectorAll('rect.word')].map(w => {
          const r = w.getBoundingClientRect();
          return {line: +w.dataset.line, word: +w.dataset.word, start: +w.dataset.start,
                  end: +w.dataset.end, text: w.dataset.text, left: r.left, right: r.right};
        }),
      };
    }
    const svg = card.querySelector('svg.pair-view');
    gallery.push({take: card.dataset.take, panels,
                  label: svg ? svg.getAttribute('aria-label') : null});
  }
  const cautions = [...document.querySelectorAll('.caution')].map(c => {
    const first = document.querySelector('audio');
    return {text: c.textContent,
            before_first_player: !!(first && (c.compareDocumentPosition(first) & Node.DOCUMENT_POSITION_FOLLOWING))};
  });
  const missing_alt = [...document.querySelectorAll('img:not([alt]), svg:not([aria-label])')]
    .filter(e => !e.closest('svg[aria-label]') || e.tagName === 'IMG').length;
  const glance = document.querySelector('#glance');
  const gr = glance.getBoundingClientRect();
  return JSON.stringify({images, audio, tiles, charts, steps, gallery, cautions, missing_alt,
                         glance_top: gr.top + window.scrollY,
                         title: document.title, body_text_length: document.body.innerText.length});
})()
"""


class Page:
    def __init__(self, ws_url):
        self.ws = websocket.create_connection(ws_url, timeout=60, suppress_origin=True)
        self.next_id = 0
        self.events = []

    def call(self, method, **params):
        self.next_id += 1
        mine = self.next_id
        self.ws.send(json.dumps({"id": mine, "method": method, "params": params}))
        while True:
            msg = json.loads(self.ws.recv())
            if msg.get("id") == mine:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})
            if "method" in msg:
                self.events.append(msg)

    def wait_for(self, method, timeout=60):
        deadline = time.time() + timeout
        for e in self.events:
            if e["method"] == method:
                return e
        while time.time() < deadline:
            msg = json.loads(self.ws.recv())
            if "method" in msg:
                self.events.append(msg)
                if msg["method"] == method:
                    return msg
        raise TimeoutError(method)

    def evaluate(self, expr):
        r = self.call("Runtime.evaluate", expression=expr, awaitPromise=True, returnByValue=True)
        if "exceptionDetails" in r:
            raise RuntimeError(json.dumps(r["exceptionDetails"]))
        return r["result"]["value"]

    def drain(self, seconds):
        self.ws.settimeout(seconds)
        try:
            while True:
                msg = json.loads(self.ws.recv())
                if "method" in msg:
                    self.events.append(msg)
        except websocket.WebSocketTimeoutException:
            pass
        self.ws.settimeout(60)


def main():
    chromium, url, shot = sys.argv[1], sys.argv[2], sys.argv[3]
    width = int(sys.argv[4]) if len(sys.argv) > 4 else 1200
    profile = tempfile.mkdtemp(prefix="retake-chromium-")
    proc = subprocess.Popen(
        [chromium, *FLAGS, f"--user-data-dir={profile}", f"--window-size={width},900", "about:blank"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )
    try:
        port_file = os.path.join(profile, "DevToolsActivePort")
        deadline = time.time() + 60
        while not os.path.exists(port_file) or os.path.getsize(port_file) == 0:
            if time.time() > deadline or proc.poll() is not None:
                raise RuntimeError("chromium did not open its DevTools port")
            time.sleep(0.1)
        port = open(port_file).read().split()[0]
        targets = json.load(urllib.request.urlopen(f"http://127.0.0.1:{port}/json/list"))
        page = Page(next(t for t in targets if t["type"] == "page")["webSocketDebuggerUrl"])
        for domain in ("Runtime", "Log", "Page", "Network"):
            page.call(f"{domain}.enable")
        page.call("Emulation.setDeviceMetricsOverride", width=width, height=900,
                  deviceScaleFactor=1, mobile=False)
        page.call("Page.navigate", url=url)
        page.wait_for("Page.loadEventFired")
        report = json.loads(page.evaluate(COLLECT))
        page.drain(1.0)
        errors = []
        failed_requests = []
        for e in page.events:
            m, p = e["method"], e.get("params", {})
            if m == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
                errors.append(" ".join(str(a.get("value", a.get("description"))) for a in p["args"]))
            elif m == "Runtime.exceptionThrown":
                errors.append(p["exceptionDetails"].get("text", "exception"))
            elif m == "Log.entryAdded" and p["entry"]["level"] == "error":
                errors.append(p["entry"]["text"] + " " + p["entry"].get("url", ""))
            elif m == "Network.loadingFailed" and not p.get("canceled"):
                failed_requests.append(p.get("errorText", ""))
        report["console_errors"] = errors
        report["failed_requests"] = failed_requests
        # A full-page screenshot at this width.
        metrics = page.call("Page.getLayoutMetrics")
        height = int(metrics["cssContentSize"]["height"])
        page.call("Emulation.setDeviceMetricsOverride", width=width, height=min(height, 16000),
                  deviceScaleFactor=1, mobile=False)
        data = page.call("Page.captureScreenshot", format="png", captureBeyondViewport=True)["data"]
        with open(shot, "wb") as f:
            f.write(base64.b64decode(data))
        report["page_height"] = height
        # A narrow window: nothing may need sideways scrolling of the page itself.
        page.call("Emulation.setDeviceMetricsOverride", width=360, height=800,
                  deviceScaleFactor=1, mobile=False)
        report["narrow_overflow_px"] = page.evaluate(
            "document.documentElement.scrollWidth - document.documentElement.clientWidth")
        print(json.dumps(report))
    finally:
        proc.terminate()
        try:
            proc.wait(10)
        except subprocess.TimeoutExpired:
            proc.kill()


if __name__ == "__main__":
    main()
