/* rhledger service worker: the app on the phone when the laptop cannot be reached.
 *
 * Served at /sw.js (scope /) by clinic/web/setup_views.service_worker_response(), which
 * replaces the CONFIG line below with the version of the static files (a hash of their
 * contents) and the list to pre-cache. A change to any file under static/ therefore makes
 * a new worker with new cache names; `activate` deletes the caches of older versions.
 *
 *   /static/...            cache-first (versioned cache; filled at install)
 *   page navigations       network-first; a good answer is kept; the kept copy when the
 *                          laptop cannot be reached; else the offline page
 *   /api/..., any non-GET  never touched: straight to the laptop, never cached
 *
 * The outbox (IndexedDB, see static/js/outbox/queue.js; sending in outbox/queue-send.js,
 * both shared with the pages) is sent when this worker starts, on `sync`, and when a page
 * asks.
 */
"use strict";

/*@config*/ var CONFIG = { version: "unversioned", precache: [], shell: ["/outbox", "/offline"], warm: ["/", "/book"] }; /*@end*/

importScripts("/static/vendor/idb-keyval/idb-keyval.umd.js", "/static/js/outbox/queue.js", "/static/js/outbox/queue-send.js");

var Q = self.rhOutbox;
var STATIC_CACHE = "rhledger-static-" + CONFIG.version;
var SHELL_CACHE = "rhledger-shell-" + CONFIG.version;
var PAGES_CACHE = "rhledger-pages-v1";   // visited pages; kept across versions, cleared at sign-out
var CURRENT = [STATIC_CACHE, SHELL_CACHE, PAGES_CACHE];
var MAX_PAGES = 150;
var NAV_TIMEOUT_MS = 8000;               // then the kept copy, if there is one
var WARM_AGAIN_MS = 10 * 60 * 1000;

self.addEventListener("install", function (event) {
  event.waitUntil(Promise.all([
    caches.open(STATIC_CACHE).then(function (c) { return c.addAll(CONFIG.precache); }),
    caches.open(SHELL_CACHE).then(function (c) {
      return Promise.all(CONFIG.shell.map(function (u) {
        return fetch(u, { credentials: "same-origin", cache: "no-store" }).then(function (res) {
          if (!res.ok) { throw new Error("pre-caching " + u + " failed: " + res.status); }
          return c.put(u, res);
        });
      }));
    })
  ]).then(function () { return self.skipWaiting(); }));
});

self.addEventListener("activate", function (event) {
  event.waitUntil(caches.keys().then(function (names) {
    return Promise.all(names.filter(function (n) {
      return n.indexOf("rhledger-") === 0 && CURRENT.indexOf(n) < 0;
    }).map(function (n) { return caches.delete(n); }));
  }).then(function () { return self.clients.claim(); }).then(function () {
    replay("activate");  // not awaited: a slow laptop must not hold up the new worker
  }));
});

self.addEventListener("fetch", function (event) {
  var req = event.request;
  if (req.method !== "GET") { return; }          // POST/PATCH: the page's outbox handles failures
  var url = new URL(req.url);
  if (url.origin !== self.location.origin) { return; }
  var p = url.pathname;
  if (p.indexOf("/api/") === 0 || p === "/net/ping" || p === "/sw.js") { return; }
  if (p.indexOf("/static/") === 0) {
    event.respondWith(cacheFirst(req));
    return;
  }
  if (req.mode === "navigate") {
    event.respondWith(networkFirst(event));
  }
});

function cacheFirst(req) {
  return caches.open(STATIC_CACHE).then(function (cache) {
    return cache.match(req).then(function (hit) {
      if (hit) { return hit; }
      return fetch(req).then(function (res) {
        if (res.ok && res.type === "basic") { cache.put(req, res.clone()); }
        return res;
      });
    });
  });
}

function pageKey(url) {
  var u = new URL(url);
  u.hash = "";
  return u.href;
}

function isKeepable(res) {
  return res && res.ok && res.type === "basic" && !res.redirected &&
    (res.headers.get("Content-Type") || "").indexOf("text/html") === 0 &&
    res.headers.get("X-Offline-Cache") !== "no";
}

function keepPage(url, res) {
  return res.clone().text().then(function (html) {
    var m = /<title>([\s\S]*?)<\/title>/i.exec(html);
    var title = m ? m[1].replace(/\s+/g, " ").trim() : "";
    var at = new Date().toISOString();
    var headers = new Headers(res.headers);
    headers.set("X-Kept-At", at);
    var copy = new Response(html, { status: 200, statusText: "OK", headers: headers });
    return caches.open(PAGES_CACHE).then(function (cache) {
      return cache.delete(url).then(function () { return cache.put(url, copy); })
        .then(function () { return cache.keys(); })
        .then(function (keys) {
          var extra = keys.length - MAX_PAGES;
          return Promise.all(keys.slice(0, Math.max(0, extra)).map(function (k) { return cache.delete(k); }))
            .then(function () { return keys.slice(0, Math.max(0, extra)).map(function (k) { return k.url; }); });
        });
    }).then(function (dropped) {
      return Q.metaUpdate("pages", function (index) {
        index = index || {};
        var path = new URL(url).pathname + new URL(url).search;
        index[path] = { title: title, at: at };
        dropped.forEach(function (d) { delete index[new URL(d).pathname + new URL(d).search]; });
        return index;
      });
    });
  });
}

/* Pages kept before the outbox scripts were split into static/js/outbox/ name the two files
 * they replaced, which are no longer served: such a copy gets their successors, in the
 * order base.html loads them, or its forms would post straight to an absent laptop. Kept
 * pages go at sign-out, so this can go once every phone has signed out since the split. */
var REPLACED_SCRIPTS = {
  "/static/js/net-queue.js": ["queue", "queue-send"],
  "/static/js/outbox.js": ["core", "status", "worker", "kept", "form-request", "form-messages", "forms", "page", "start"]
};

function withCurrentScripts(html) {
  return html.replace(/<script src="(\/static\/js\/(?:net-queue|outbox)\.js)"><\/script>/g, function (tag, src) {
    return REPLACED_SCRIPTS[src].map(function (name) {
      return '<script src="/static/js/outbox/' + name + '.js"></script>';
    }).join("\n");
  });
}

/* The kept copy, marked so the page knows it is not live: static/js/outbox/kept.js shows
 * when it was kept, and core.js does not trust its security token. */
function keptCopy(url) {
  // The copy kept at the last visit first, else the one pre-cached at install.
  return caches.open(PAGES_CACHE).then(function (c) { return c.match(url, { ignoreVary: true }); }).then(function (hit) {
    return hit || caches.match(url, { ignoreVary: true });
  }).then(function (hit) {
    if (!hit) { return null; }
    return hit.text().then(function (kept) {
      var html = withCurrentScripts(kept);
      var at = hit.headers.get("X-Kept-At") || "";
      var marker = '<meta name="rhledger-offline-copy" content="' + (at || new Date().toISOString()) + '">';
      var out = /<head[^>]*>/i.test(html) ? html.replace(/<head[^>]*>/i, function (h) { return h + marker; }) : marker + html;
      var headers = new Headers(hit.headers);
      headers.set("Content-Type", "text/html; charset=utf-8");
      return new Response(out, { status: 200, statusText: "OK", headers: headers });
    });
  });
}

function offlinePage() {
  return keptCopy(new URL("/offline", self.location.origin).href).then(function (res) {
    return res || new Response(
      "<!doctype html><meta charset=utf-8><meta name=viewport content='width=device-width'>" +
      "<title>Laptop not reachable</title><h1>The laptop cannot be reached</h1>" +
      "<p>This page is not saved on this phone. <a href='/outbox'>Outbox</a></p>",
      { status: 503, headers: { "Content-Type": "text/html; charset=utf-8" } });
  });
}

function networkFirst(event) {
  var req = event.request;
  var key = pageKey(req.url);
  var network = fetch(req);
  // Keep a good answer (cloned before the page reads it); the laptop's answer always wins.
  event.waitUntil(network.then(function (res) {
    return isKeepable(res) ? keepPage(key, res.clone()) : null;
  }).catch(function () { return null; }));
  return caches.match(key, { ignoreVary: true }).then(function (kept) {
    var timeout = new Promise(function (resolve) {
      // Only when there is a copy to show: otherwise wait for the laptop as long as it takes.
      if (kept) { setTimeout(function () { resolve(null); }, NAV_TIMEOUT_MS); }
    });
    return Promise.race([network, timeout]).then(function (res) {
      if (res && !(res.status >= 502 && res.status <= 504)) { return res; }
      return keptCopy(key).then(function (copy) { return copy || res || network; });
    }, function () {
      return keptCopy(key).then(function (copy) { return copy || offlinePage(); });
    });
  });
}

/* A page asks to hold pages the phone will need offline (entry forms of the record it
 * shows, the booking form, Today). Each is fetched with the session's cookie and kept only
 * when it comes back as a page (not a redirect to sign-in). */
function warm(urls) {
  return Q.metaGet("pages").then(function (index) {
    index = index || {};
    var now = Date.now();
    var todo = urls.filter(function (u, i) {
      var seen = index[u];
      return urls.indexOf(u) === i && !(seen && now - Date.parse(seen.at) < WARM_AGAIN_MS);
    });
    return todo.reduce(function (chain, u) {
      return chain.then(function () {
        var abs = new URL(u, self.location.origin).href;
        return fetch(abs, { credentials: "same-origin", cache: "no-store" }).then(function (res) {
          return isKeepable(res) ? keepPage(pageKey(abs), res) : null;
        }).catch(function () { return null; });  // the laptop went away: warming is a best effort
      });
    }, Promise.resolve());
  });
}

function replay(why) {
  return Q.replay({ why: why }).catch(function (err) {
    // Left in the outbox; the pages show it as waiting.
    console.error("rhledger: sending the outbox from the worker failed", err);
    return { offline: true };
  });
}

self.addEventListener("message", function (event) {
  var msg = event.data || {};
  if (msg.type === "warm") {
    event.waitUntil(warm((msg.urls || []).concat(msg.defaults ? CONFIG.warm : [])));
  } else if (msg.type === "clear-pages") {
    event.waitUntil(caches.delete(PAGES_CACHE).then(function () { return Q.metaSet("pages", {}); }));
  } else if (msg.type === "replay") {
    event.waitUntil(replay("message"));
  }
});

self.addEventListener("sync", function (event) {
  if (event.tag === Q.SYNC_TAG) {
    event.waitUntil(replay("sync").then(function (summary) {
      // Rejecting asks the browser to try again later.
      if (summary && summary.offline) { throw new Error("the laptop is not reachable yet"); }
    }));
  }
});

// Each time the browser starts this worker (it stops idle workers), send what waits.
replay("start");
