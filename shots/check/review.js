"use strict";
(function () {
  const data = JSON.parse(document.getElementById("review-data").textContent);

  function el(tag, className, text) {
    const node = document.createElement(tag);
    if (className) node.className = className;
    if (text !== undefined) node.textContent = text;
    return node;
  }

  function picture(src, alt) {
    const tile = el("div", "tile");
    const img = el("img");
    img.src = src;
    img.alt = alt;
    img.loading = "eager";
    img.decoding = "async";
    tile.appendChild(img);
    return tile;
  }

  function stops(value) {
    return (value >= 0 ? "+" : "\u2212") + Math.abs(value).toFixed(2) + " stops";
  }

  function describe(image) {
    const parts = [image.variant, image.shot];
    if (image.view) parts.push(image.view);
    if (image.frame) parts.push("frame " + image.frame);
    return parts.join(" \u00b7 ");
  }

  function figures(image) {
    const found = [];
    if (image.exposure !== null) found.push("light " + stops(image.exposure) + " vs catalog");
    if (image.variantStops !== null) found.push(stops(image.variantStops) + " vs its variants");
    if (image.ssim !== undefined && image.ssim !== null) found.push("SSIM " + image.ssim.toFixed(3));
    if (image.changed !== undefined && image.changed !== null) {
      found.push((100 * image.changed).toFixed(1) + "% changed");
    }
    return found.join(" \u00b7 ");
  }

  function verdict(image) {
    return image.flagged ? el("span", "verdict flag", "Needs a look") : el("span", "verdict fine", "Consistent");
  }

  function comparison(image) {
    const box = el("div", "compare");
    const before = picture(image.approved, "Approved: " + image.model + " " + describe(image));
    const after = picture(image.src, "Now: " + image.model + " " + describe(image));
    after.classList.add("after");
    box.appendChild(before);
    box.appendChild(after);
    box.appendChild(el("div", "seam"));
    const slider = el("input", "split");
    slider.type = "range";
    slider.min = "0";
    slider.max = "100";
    slider.value = "50";
    slider.setAttribute("aria-label", "Approved on the left, now on the right");
    slider.addEventListener("input", function () {
      box.style.setProperty("--split", slider.value + "%");
    });
    const labels = el("div", "compare-labels");
    labels.appendChild(el("span", "", "Approved"));
    labels.appendChild(el("span", "", "Now"));
    const wrap = el("div", "before-after");
    wrap.appendChild(box);
    wrap.appendChild(slider);
    wrap.appendChild(labels);
    return wrap;
  }

  function attentionCard(image) {
    const card = el("article", "card is-flagged");
    card.dataset.src = image.src;
    card.appendChild(image.approved ? comparison(image) : picture(image.src, image.model + " " + describe(image)));
    const body = el("div", "body");
    body.appendChild(el("div", "label", image.model));
    body.appendChild(el("div", "where", describe(image)));
    const list = el("ul", "reasons");
    image.reasons.forEach(function (reason) { list.appendChild(el("li", "", reason)); });
    body.appendChild(list);
    const numbers = figures(image);
    if (numbers) body.appendChild(el("div", "figures", numbers));
    if (image.difference) {
      const more = el("details", "difference");
      more.appendChild(el("summary", "", "Where it changed"));
      const img = el("img");
      img.src = image.difference;
      img.alt = "Changed pixels of " + image.model + " " + describe(image);
      more.appendChild(img);
      body.appendChild(more);
    }
    card.appendChild(body);
    return card;
  }

  function gridCard(image) {
    const card = el("figure", "card" + (image.flagged ? " is-flagged" : ""));
    card.dataset.src = image.src;
    card.appendChild(picture(image.src, image.model + " " + describe(image)));
    const caption = el("figcaption");
    caption.appendChild(el("div", "", image.view ? image.shot + " \u00b7 " + image.view : image.shot));
    caption.appendChild(verdict(image));
    if (image.flagged) caption.title = image.reasons.join("\n");
    card.appendChild(caption);
    return card;
  }

  function count(n, one, many) {
    return n + " " + (n === 1 ? one : many);
  }

  function drawSummary() {
    const summary = document.getElementById("summary");
    const models = new Set(data.images.map(function (image) { return image.model; }));
    summary.appendChild(el("strong", "", count(data.checked, "image", "images")));
    summary.appendChild(document.createTextNode(" of " + count(models.size, "model", "models") + " \u00b7 "));
    summary.appendChild(el("strong", data.flagged ? "count-flag" : "", String(data.flagged)));
    summary.appendChild(document.createTextNode(data.flagged === 1 ? " needs a look" : " need a look"));
    if (data.against) summary.appendChild(document.createTextNode(" \u00b7 compared with " + data.against));
  }

  function drawAttention() {
    const flagged = data.images.filter(function (image) { return image.flagged; });
    const lede = document.getElementById("attention-lede");
    lede.textContent = flagged.length
      ? "Every image flagged by the check, with its reasons."
      : "Nothing: every image agrees with the catalog" + (data.against ? " and its approved image." : ".");
    const cards = document.getElementById("attention-cards");
    flagged.forEach(function (image) { cards.appendChild(attentionCard(image)); });
  }

  function drawGrid() {
    const grid = document.getElementById("grid");
    const models = new Map();
    data.images.forEach(function (image) {
      if (!models.has(image.model)) models.set(image.model, new Map());
      const variants = models.get(image.model);
      if (!variants.has(image.variant)) variants.set(image.variant, []);
      variants.get(image.variant).push(image);
    });
    models.forEach(function (variants, model) {
      const row = el("div", "model-row");
      row.appendChild(el("div", "model-name", model));
      const line = el("div", "variants");
      variants.forEach(function (images, variant) {
        const column = el("div", "variant");
        column.appendChild(el("h3", "", variant));
        const shots = el("div", "shots");
        images.forEach(function (image) { shots.appendChild(gridCard(image)); });
        column.appendChild(shots);
        line.appendChild(column);
      });
      row.appendChild(line);
      grid.appendChild(row);
    });
  }

  function turntable(spec) {
    const player = el("figure", "player");
    player.tabIndex = 0;
    player.setAttribute("role", "slider");
    player.setAttribute("aria-label", "Turn " + spec.model + ", " + spec.variant + ", " + spec.shot);
    player.setAttribute("aria-valuemin", "1");
    player.setAttribute("aria-valuemax", String(spec.frames.length));
    const stage = picture(spec.frames[0], spec.model + " " + spec.variant + " " + spec.shot);
    const img = stage.querySelector("img");
    img.draggable = false;
    const preloaded = spec.frames.map(function (src) { const image = new Image(); image.src = src; return image; });
    const dial = el("div", "dial");
    const fill = el("div", "dial-fill");
    dial.appendChild(fill);
    const caption = el("figcaption");
    caption.appendChild(el("span", "label", spec.model + " \u00b7 " + spec.variant));
    const count = el("span", "frame-count");
    caption.appendChild(count);
    player.appendChild(stage);
    player.appendChild(dial);
    player.appendChild(caption);
    const total = spec.frames.length;
    let index = 0;
    function show(next) {
      index = ((next % total) + total) % total;
      img.src = preloaded[index].src;
      player.dataset.frame = String(index);
      player.setAttribute("aria-valuenow", String(index + 1));
      count.textContent = "frame " + (index + 1) + " / " + total;
      fill.style.width = (100 * (index + 1) / total) + "%";
    }
    show(0);
    let dragFrom = null;
    stage.addEventListener("pointerdown", function (event) {
      dragFrom = { x: event.clientX, index: index };
      stage.setPointerCapture(event.pointerId);
      player.focus({ preventScroll: true });
    });
    stage.addEventListener("pointermove", function (event) {
      if (dragFrom === null) return;
      const perFrame = stage.clientWidth / total;  // one drag across the product turns it once
      show(dragFrom.index + Math.round((event.clientX - dragFrom.x) / perFrame));
    });
    function release() { dragFrom = null; }
    stage.addEventListener("pointerup", release);
    stage.addEventListener("pointercancel", release);
    let wheel = 0;
    stage.addEventListener("wheel", function (event) {
      event.preventDefault();
      wheel += Math.abs(event.deltaX) > Math.abs(event.deltaY) ? event.deltaX : event.deltaY;
      const steps = Math.trunc(wheel / 40);
      if (steps !== 0) { wheel -= steps * 40; show(index + steps); }
    }, { passive: false });
    player.addEventListener("keydown", function (event) {
      const keys = { ArrowRight: 1, ArrowUp: 1, ArrowLeft: -1, ArrowDown: -1 };
      if (event.key in keys) show(index + keys[event.key]);
      else if (event.key === "Home") show(0);
      else if (event.key === "End") show(total - 1);
      else return;
      event.preventDefault();
    });
    return player;
  }

  function drawTurntables() {
    const players = document.getElementById("players");
    if (!data.turntables.length) {
      document.getElementById("turntables").hidden = true;
      return;
    }
    data.turntables.forEach(function (spec) { players.appendChild(turntable(spec)); });
  }

  function drawNotes() {
    const list = document.getElementById("note-list");
    if (!data.notes.length) { document.getElementById("notes").hidden = true; return; }
    data.notes.forEach(function (note) { list.appendChild(el("li", "", note)); });
  }

  function filters() {
    const all = document.getElementById("filter-all");
    const flagged = document.getElementById("filter-flagged");
    function choose(onlyFlagged) {
      document.body.classList.toggle("only-flagged", onlyFlagged);
      all.setAttribute("aria-pressed", String(!onlyFlagged));
      flagged.setAttribute("aria-pressed", String(onlyFlagged));
    }
    all.addEventListener("click", function () { choose(false); });
    flagged.addEventListener("click", function () { choose(true); });
  }

  drawSummary();
  drawAttention();
  drawGrid();
  drawTurntables();
  drawNotes();
  filters();
})();
