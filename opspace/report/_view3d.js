// opspace 3-D view: draws a scene written by opspace/report/_scene3d.py with
// three.js (the bundle OPSPACE_THREE inlined before this script).  Offline:
// no request leaves the page.  Z is up, lengths in metres.
// Each pose is 8 numbers: x y z, quaternion x y z w, stretch along z (0 hides).
(function () {
  "use strict";
  const T = window.OPSPACE_THREE;

  function decode(b64, Type) {
    const bin = atob(b64);
    const bytes = new Uint8Array(bin.length);
    for (let i = 0; i < bin.length; i++) bytes[i] = bin.charCodeAt(i);
    return new Type(bytes.buffer);
  }

  function polygonGeometry(points) {
    // a flat fan over the (convex) support polygon, z = 0 in its frame;
    // two points (collinear contacts) make a thin strip
    const pos = [], idx = [];
    let P = points;
    if (P.length === 2) {
      const dx = P[1][0] - P[0][0], dy = P[1][1] - P[0][1];
      const n = Math.hypot(dx, dy) || 1, w = 0.01;
      const ox = -dy / n * w, oy = dx / n * w;
      P = [[P[0][0] - ox, P[0][1] - oy], [P[1][0] - ox, P[1][1] - oy],
           [P[1][0] + ox, P[1][1] + oy], [P[0][0] + ox, P[0][1] + oy]];
    }
    for (const p of P) pos.push(p[0], p[1], 0);
    for (let i = 1; i + 1 < P.length; i++) idx.push(0, i, i + 1);
    const g = new T.BufferGeometry();
    g.setAttribute("position", new T.BufferAttribute(new Float32Array(pos), 3));
    g.setIndex(idx);
    g.computeVertexNormals();
    return g;
  }

  function makeGeometry(d) {
    let g;
    if (d.kind === "box") {
      g = new T.BoxGeometry(d.size[0], d.size[1], d.size[2]);
    } else if (d.kind === "cylinder") {
      // three's cylinder runs along y; URDF's along z
      g = new T.CylinderGeometry(d.radius, d.radius, d.length, 32);
      g.rotateX(Math.PI / 2);
    } else if (d.kind === "sphere") {
      g = new T.SphereGeometry(d.radius, 24, 16);
    } else if (d.kind === "mesh") {
      g = new T.BufferGeometry();
      g.setAttribute("position", new T.BufferAttribute(decode(d.positions, Float32Array), 3));
      const I = d.index_type === "uint16" ? Uint16Array : Uint32Array;
      g.setIndex(new T.BufferAttribute(decode(d.indices, I), 1));
      g.computeVertexNormals();
    } else if (d.kind === "polygon") {
      g = polygonGeometry(d.points);
    } else {
      throw new Error("opspace view: unknown geometry " + d.kind);
    }
    return g;
  }

  function makeRenderer(canvas) {
    try {
      return new T.WebGLRenderer({ canvas: canvas, antialias: true, preserveDrawingBuffer: true });
    } catch (err) {
      return null;
    }
  }

  function build(root, data) {
    const canvas = root.querySelector("canvas");
    const renderer = makeRenderer(canvas);
    if (!renderer) {
      root.querySelector(".v3d-bar").textContent =
        "This browser offers no WebGL: the 3-D view cannot be drawn (the figures below still apply).";
      root.setAttribute("data-view3d", "no-webgl");
      return;
    }
    renderer.setPixelRatio(window.devicePixelRatio || 1);
    const scene = new T.Scene();
    scene.background = new T.Color("#f4f6f8");
    scene.add(new T.HemisphereLight(0xffffff, 0x8a8a80, 2.2));
    const sun = new T.DirectionalLight(0xffffff, 1.6);
    sun.position.set(2, -3, 5);
    scene.add(sun);

    const geos = data.geometries.map(makeGeometry);
    const objects = data.parts.map(function (p) {
      const mat = new T.MeshStandardMaterial({
        color: p.color, roughness: 0.65, metalness: 0.05,
        transparent: p.opacity < 1, opacity: p.opacity, side: T.DoubleSide,
        depthWrite: p.opacity >= 1,
      });
      const m = new T.Mesh(geos[p.geometry], mat);
      m.name = p.name;
      scene.add(m);
      return m;
    });
    const [nf, np] = data.shape;
    const poses = decode(data.poses, Float32Array);

    function show(k) {
      for (let j = 0; j < np; j++) {
        const o = (k * np + j) * 8, m = objects[j];
        m.position.set(poses[o], poses[o + 1], poses[o + 2]);
        m.quaternion.set(poses[o + 3], poses[o + 4], poses[o + 5], poses[o + 6]);
        m.visible = poses[o + 7] > 0;
        if (m.visible) m.scale.set(1, 1, poses[o + 7] === 1 ? 1 : poses[o + 7]);
      }
    }

    // the grid covers everything the frames visit; the camera frames the
    // robot (all poses, or the first frame of an animation, then follows the base)
    const all = new T.Box3(), first = new T.Box3();
    for (let k = nf - 1; k >= 0; k--) {
      show(k);
      const b = new T.Box3();
      objects.forEach(function (m, j) {
        if (m.visible && !(data.times && data.parts[j].marker)) b.expandByObject(m);
      });
      all.union(b);
      if (k === 0) first.copy(b);
    }
    const view = data.times ? first : all;
    const size = view.getSize(new T.Vector3()), centre = view.getCenter(new T.Vector3());
    const extent = Math.max(size.x, size.y, size.z, 0.2);
    const step = Math.pow(10, Math.floor(Math.log10(extent / 2)));
    const span = all.getSize(new T.Vector3()), middle = all.getCenter(new T.Vector3());
    const cells = Math.min(400, Math.ceil((Math.max(span.x, span.y) + 0.6 * extent) / step / 2) * 2 + 2);
    const grid = new T.GridHelper(cells * step, cells, 0x9aa3ad, 0xd5dae0);
    grid.rotateX(Math.PI / 2);
    grid.position.set(Math.round(middle.x / step) * step, Math.round(middle.y / step) * step, 0);
    scene.add(grid);

    const camera = new T.PerspectiveCamera(40, 1, extent / 100, extent * 100);
    camera.up.set(0, 0, 1);
    camera.position.set(centre.x + 0.95 * extent, centre.y - 1.15 * extent, centre.z + 0.6 * extent);
    const controls = new T.OrbitControls(camera, canvas);
    controls.target.copy(centre);
    controls.update();
    const anchor = data.follow === null || data.follow === undefined ? null : objects[data.follow];
    const last = new T.Vector3();
    if (anchor) { show(0); last.copy(anchor.position); }

    function render() { renderer.render(scene, camera); }
    function resize() {
      const w = Math.max(root.clientWidth, 200), h = Math.round(Math.min(520, 0.62 * w));
      renderer.setSize(w, h, true);
      camera.aspect = w / h;
      camera.updateProjectionMatrix();
      render();
    }
    controls.addEventListener("change", render);
    window.addEventListener("resize", resize);

    const bar = root.querySelector(".v3d-bar"), label = root.querySelector(".v3d-label");
    const slider = root.querySelector("input[type=range]");
    let current = 0;
    function go(k) {
      current = k;
      show(k);
      if (anchor && data.times) {  // the camera rides along with the base
        const d = anchor.position.clone().sub(last);
        camera.position.add(d);
        controls.target.add(d);
        controls.update();
        last.copy(anchor.position);
      }
      label.textContent = data.labels[k];
      if (slider) slider.value = String(k);
      render();
    }
    if (data.times) {
      const play = root.querySelector("button");
      slider.max = String(nf - 1);
      slider.addEventListener("input", function () { stop(); go(Number(slider.value)); });
      let timer = null, t0 = 0, tStart = 0;
      function stop() { if (timer) { cancelAnimationFrame(timer); timer = null; play.textContent = "Play"; } }
      function tick(now) {
        const t = tStart + (now - t0) / 1000, times = data.times;
        let k = current;
        while (k + 1 < nf && times[k + 1] <= t) k++;
        go(k);
        if (k + 1 >= nf) { stop(); return; }
        timer = requestAnimationFrame(tick);
      }
      play.addEventListener("click", function () {
        if (timer) { stop(); return; }
        if (current + 1 >= nf) go(0);
        play.textContent = "Pause";
        t0 = performance.now();
        tStart = data.times[current];
        timer = requestAnimationFrame(tick);
      });
    } else {
      const buttons = bar.querySelectorAll("button");
      buttons.forEach(function (btn, k) {
        btn.addEventListener("click", function () {
          buttons.forEach(function (b) { b.classList.remove("on"); });
          btn.classList.add("on");
          go(k);
        });
      });
      if (buttons.length) buttons[0].classList.add("on");
    }
    resize();
    go(0);
    root.view3d = { grid: grid, objects: objects, render: render, go: go, frames: nf };
    root.setAttribute("data-view3d", "ready");
  }

  document.querySelectorAll(".view3d").forEach(function (root) {
    const data = JSON.parse(root.querySelector("script[type='application/json']").textContent);
    build(root, data);
  });
})();
