// The web page: each form is sent to the service's JSON API with fetch, and the answer is
// shown as tables (summary and warnings first), charts, Markdown or a file to download.
// Fields are named by their path in the request ("population.size"), so that the
// problem+json `errors`, keyed by the same paths, are shown beside the fields they name.
"use strict";

(function () {
  // The API key, when the service asks for one: in this variable only, for this tab.
  let apiKey = null;
  // What to send again once the key is given.
  let waitingForKey = null;

  const MARKDOWN = "text/markdown";
  const JSON_TYPE = "application/json";
  const SVG = "image/svg+xml";
  const LIST_SHOWN = 60;

  // ------------------------------------------------------------------ reading the forms

  class FieldError extends Error {
    constructor(field, message) {
      super(message);
      this.field = field;
    }
  }

  function lines(text) {
    return text.split(/\r?\n/).map((line) => line.trim()).filter((line) => line !== "");
  }

  function cells(line) {
    return line.split(/[,;\t]/).map((cell) => cell.trim());
  }

  function integerOrText(text) {
    // Anything that is not plainly an integer goes as written, for the service to name.
    return /^-?\d+$/.test(text) ? Number(text) : text;
  }

  function numberOrText(text) {
    return /^-?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$/.test(text) ? Number(text) : text;
  }

  const READERS = {
    text: (el) => el.value.trim() || undefined,
    money: (el) => el.value.trim() || undefined,
    integer: (el) => (el.value.trim() === "" ? undefined : integerOrText(el.value.trim())),
    number: (el) => (el.value.trim() === "" ? undefined : numberOrText(el.value.trim())),
    lines: (el) => {
      const all = lines(el.value);
      return all.length ? all : undefined;
    },
    integers: (el) => {
      const all = el.value.split(/[\s,;]+/).filter((part) => part !== "");
      return all.length ? all.map(integerOrText) : undefined;
    },
    ranges: (el) => {
      const all = lines(el.value);
      if (!all.length) return undefined;
      return all.map((line, index) => {
        const match = /^(-?\d+)\s*(?:-|–|\.\.|to)\s*(-?\d+)$/.exec(line);
        if (!match) {
          throw new FieldError(el.name, `line ${index + 1} ("${line}"): write first-last, e.g. 10001-14200`);
        }
        return { first: Number(match[1]), last: Number(match[2]) };
      });
    },
    "id-amounts": (el) => {
      const all = lines(el.value);
      if (!all.length) return undefined;
      return all.map((line, index) => {
        // The amount is all after the first separator, as written ("1,432.02" included).
        const match = /^([^,;\t]+)[,;\t](.+)$/.exec(line);
        if (!match || !match[1].trim() || !match[2].trim()) {
          throw new FieldError(el.name, `line ${index + 1} ("${line}"): write identifier, amount`);
        }
        return { id: match[1].trim(), amount: match[2].trim() };
      });
    },
    misstatements: (el) => {
      const all = lines(el.value);
      return all.map((line, index) => {
        const parts = cells(line);
        if (parts.length !== 3 || parts.some((part) => part === "")) {
          throw new FieldError(el.name,
            `line ${index + 1} ("${line}"): write identifier, book amount, audited amount`);
        }
        return { id: parts[0], book_amount: parts[1], audited_amount: parts[2] };
      });
    },
    "named-rates": (el) => {
      const all = lines(el.value);
      if (!all.length) return undefined;
      const rates = {};
      all.forEach((line, index) => {
        const cut = line.lastIndexOf("=");
        if (cut < 1) {
          throw new FieldError(el.name, `line ${index + 1} ("${line}"): write attribute = rate`);
        }
        rates[line.slice(0, cut).trim()] = numberOrText(line.slice(cut + 1).trim());
      });
      return rates;
    },
  };

  function setPath(target, path, value) {
    const parts = path.split(".");
    let node = target;
    parts.slice(0, -1).forEach((part) => {
      node[part] = node[part] || {};
      node = node[part];
    });
    node[parts[parts.length - 1]] = value;
  }

  // The request a form describes; disabled (hidden) fields and empty ones are left out.
  function readForm(form) {
    const body = {};
    let file = null;
    form.querySelectorAll("[data-type]").forEach((el) => {
      if (el.disabled || el.closest("fieldset:disabled")) return;
      const type = el.dataset.type;
      if (type === "file") {
        file = el.files && el.files.length ? el.files[0] : null;
        return;
      }
      if (type === "checked") {
        if (el.checked) {
          const list = body[el.name] || [];
          list.push(el.value);
          setPath(body, el.name, list);
        }
        return;
      }
      const value = READERS[type](el);
      if (value !== undefined) setPath(body, el.name, value);
    });
    return { body, file };
  }

  // ------------------------------------------------------------------ calling the API

  async function call(path, body, accept, file) {
    const headers = { Accept: accept };
    if (apiKey) headers.Authorization = `Bearer ${apiKey}`;
    let payload;
    if (file) {
      payload = new FormData();
      payload.append("file", file, file.name);
      payload.append("request", new Blob([JSON.stringify(body)], { type: JSON_TYPE }));
    } else {
      headers["Content-Type"] = JSON_TYPE;
      payload = JSON.stringify(body);
    }
    return fetch(path, { method: "POST", headers, body: payload });
  }

  async function problemOf(response) {
    const type = response.headers.get("Content-Type") || "";
    if (type.includes("json")) {
      try {
        return await response.json();
      } catch (ignored) {
        // fall through to the plain description
      }
    }
    return { title: response.statusText, status: response.status, detail: await response.text() };
  }

  // ------------------------------------------------------------------ showing errors

  function clearErrors(form, result) {
    form.querySelectorAll(".field-error[data-for]").forEach((el) => el.remove());
    form.querySelectorAll("[aria-invalid]").forEach((el) => {
      el.removeAttribute("aria-invalid");
      const described = (el.getAttribute("aria-describedby") || "")
        .split(" ").filter((id) => id && !id.startsWith("error-"));
      if (described.length) el.setAttribute("aria-describedby", described.join(" "));
      else el.removeAttribute("aria-describedby");
    });
    if (result) result.replaceChildren();
  }

  // The form control a problem's field path names: the path itself, else its nearest parent.
  function controlFor(form, field) {
    let path = field.replace(/\[\d+\]/g, "");
    for (;;) {
      const found = form.querySelector(`[name="${CSS.escape(path)}"]:not(:disabled)`)
        || form.querySelector(`[data-field="${CSS.escape(path)}"]`);
      if (found) return found;
      if (!path.includes(".")) return null;
      path = path.slice(0, path.lastIndexOf("."));
    }
  }

  function showFieldError(form, field, messages) {
    const control = controlFor(form, field);
    if (!control) return false;
    const box = control.closest(".field") || control.parentElement;
    const id = `error-${control.id || control.name || "field"}-${box.querySelectorAll(".field-error").length}`;
    const note = element("p", { class: "field-error", id, "data-for": field },
      `${field}: ${messages.join(" ")}`);
    box.appendChild(note);
    const target = control.matches("fieldset") ? control.querySelector("input") || control : control;
    target.setAttribute("aria-invalid", "true");
    const described = target.getAttribute("aria-describedby");
    target.setAttribute("aria-describedby", described ? `${described} ${id}` : id);
    return true;
  }

  function showProblem(form, result, problem) {
    const errors = problem.errors || {};
    const unplaced = [];
    let first = null;
    Object.entries(errors).forEach(([field, messages]) => {
      if (form && showFieldError(form, field, messages)) {
        first = first || controlFor(form, field);
      } else {
        unplaced.push(`${field}: ${messages.join(" ")}`);
      }
    });
    const box = element("div", { class: "problem", role: "alert" },
      element("h4", {}, `${problem.title || "Error"} (${problem.status || "?"})`));
    if (!Object.keys(errors).length || unplaced.length) {
      if (unplaced.length) box.appendChild(list(unplaced));
      else box.appendChild(element("p", {}, problem.detail || ""));
    } else {
      box.appendChild(element("p", {}, "See the messages beside the fields named."));
    }
    if (problem.request_id) {
      box.appendChild(element("p", { class: "muted" }, `Request id ${problem.request_id}`));
    }
    result.replaceChildren(box);
    if (first) {
      const target = first.matches("fieldset") ? first.querySelector("input") : first;
      if (target) target.focus();
    }
  }

  // ------------------------------------------------------------------ showing answers

  function element(tag, attributes, ...children) {
    const el = document.createElement(tag);
    Object.entries(attributes || {}).forEach(([name, value]) => el.setAttribute(name, value));
    children.forEach((child) => {
      if (child === null || child === undefined) return;
      el.append(child instanceof Node ? child : String(child));
    });
    return el;
  }

  function list(items) {
    return element("ul", {}, ...items.map((item) => element("li", {}, item)));
  }

  function label(key) {
    const text = String(key).replace(/_/g, " ");
    return text.charAt(0).toUpperCase() + text.slice(1);
  }

  function scalar(value) {
    if (value === null) return "—";
    if (typeof value === "boolean") return value ? "yes" : "no";
    return String(value);
  }

  function isScalar(value) {
    return value === null || typeof value !== "object";
  }

  function scrollable(table, name) {
    return element("div", { class: "scroll", role: "region", tabindex: "0", "aria-label": name }, table);
  }

  // Records of a few fields read best as one table; records of many (an evaluation per
  // attribute) as one table each, named by the record's own name when it has one.
  const WIDE_RECORD = 6;

  function recordsTable(records, name) {
    const columns = [];
    records.forEach((record) => Object.keys(record).forEach((key) => {
      if (!columns.includes(key)) columns.push(key);
    }));
    if (columns.length > WIDE_RECORD) {
      return element("div", { class: "records" }, ...records.slice(0, LIST_SHOWN).map((record, index) => {
        const own = record.attribute || record.label || record.id || record.method;
        return valuesTable(record, `${label(name)}: ${own || index + 1}`);
      }));
    }
    const shown = records.slice(0, LIST_SHOWN);
    const table = element("table", {},
      element("caption", {}, records.length > LIST_SHOWN
        ? `${label(name)} (the first ${LIST_SHOWN} of ${records.length})` : label(name)),
      element("thead", {}, element("tr", {}, ...columns.map((c) => element("th", { scope: "col" }, label(c))))),
      element("tbody", {}, ...shown.map((record) => element("tr", {},
        ...columns.map((c) => element("td", {}, cellContent(record[c], c)))))));
    return scrollable(table, label(name));
  }

  function cellContent(value, name) {
    if (isScalar(value)) return scalar(value);
    if (Array.isArray(value)) {
      if (value.every(isScalar)) return listText(value);
      return recordsTable(value, name);
    }
    return valuesTable(value, name);
  }

  function listText(values) {
    if (!values.length) return "none";
    const shown = values.slice(0, LIST_SHOWN).map(scalar).join(", ");
    return values.length > LIST_SHOWN ? `${shown}, … (${values.length} in all)` : shown;
  }

  // Used by the page itself (the curve's request), or shown above the answer's table.
  const NOT_IN_TABLE = new Set(["curve_request", "links"]);
  const SHOWN_APART = new Set(["summary", "warnings"]);

  function valuesTable(record, name, top) {
    const rows = Object.entries(record)
      .filter(([key]) => !NOT_IN_TABLE.has(key) && !(top && SHOWN_APART.has(key)))
      .map(([key, value]) => element("tr", {},
        element("th", { scope: "row" }, label(key)),
        element("td", {}, cellContent(value, key))));
    const table = element("table", { class: "values" }, element("caption", {}, label(name)),
      element("tbody", {}, ...rows));
    return scrollable(table, label(name));
  }

  function summaryAndWarnings(answer) {
    const parts = [];
    if (typeof answer.summary === "string") {
      parts.push(element("p", { class: "summary" }, answer.summary));
    }
    if (Array.isArray(answer.warnings) && answer.warnings.length) {
      parts.push(element("div", { class: "warnings" },
        element("h4", {}, "Warnings"), list(answer.warnings)));
    }
    return parts;
  }

  function showDocument(result, answer) {
    const parts = [element("h3", { tabindex: "-1", class: "result-heading" }, "Result")];
    parts.push(...summaryAndWarnings(answer));
    parts.push(valuesTable(answer, "answer", true));
    const raw = element("details", {}, element("summary", {}, "The answer as JSON"),
      element("pre", { class: "code" }, JSON.stringify(answer, null, 2)));
    parts.push(raw);
    result.replaceChildren(...parts);
  }

  function showText(result, text, heading) {
    const id = `text-${Math.random().toString(36).slice(2)}`;
    const area = element("textarea", { id, class: "code", readonly: "", rows: "16", spellcheck: "false" });
    area.value = text;
    const status = element("span", { class: "muted", role: "status" });
    const copy = element("button", { type: "button" }, "Copy");
    copy.addEventListener("click", async () => {
      try {
        await navigator.clipboard.writeText(text);
      } catch (ignored) {
        area.select();
        document.execCommand("copy");
      }
      status.textContent = "Copied.";
    });
    result.replaceChildren(element("h3", { tabindex: "-1", class: "result-heading" }, heading),
      element("label", { for: id }, heading), area, element("div", { class: "actions" }, copy, status));
  }

  async function showChart(result, response, description) {
    const blob = await response.blob();
    const image = element("img", { class: "chart", alt: description, src: URL.createObjectURL(blob) });
    result.appendChild(element("figure", {}, image, element("figcaption", {}, description)));
  }

  function fileName(response, fallback) {
    const header = response.headers.get("Content-Disposition") || "";
    const match = /filename="?([^";]+)"?/.exec(header);
    return match ? match[1] : fallback;
  }

  async function download(result, response, fallback) {
    const blob = await response.blob();
    const name = fileName(response, fallback);
    const link = element("a", { href: URL.createObjectURL(blob), download: name, class: "download" },
      `Save ${name} again`);
    result.replaceChildren(element("p", { role: "status" },
      `Downloaded ${name} (${blob.size.toLocaleString("en")} bytes). `, link));
    link.click();
  }

  // ------------------------------------------------------------------ sending a form

  async function send(form, accept, filename) {
    const result = form.nextElementSibling;
    clearErrors(form, result);
    let request;
    try {
      request = readForm(form);
    } catch (error) {
      if (error instanceof FieldError) {
        showProblem(form, result, { title: "Invalid input", status: "not sent", errors: { [error.field]: [error.message] } });
        return;
      }
      throw error;
    }
    if (form.dataset.multipart && !request.file) {
      showProblem(form, result, { title: "Invalid input", status: "not sent", errors: { file: ["choose a file"] } });
      return;
    }
    await exchange(form, result, form.dataset.operation, request.body, accept, request.file, filename);
  }

  async function exchange(form, result, path, body, accept, file, filename) {
    result.replaceChildren(element("p", { class: "muted", role: "status" }, "Working…"));
    let response;
    try {
      response = await call(path, body, accept, file);
    } catch (error) {
      showProblem(form, result, { title: "The service did not answer", status: "network", detail: String(error) });
      return;
    }
    if (response.status === 401) {
      waitingForKey = () => exchange(form, result, path, body, accept, file, filename);
      askForKey(apiKey ? "The service does not accept this key; enter another." : null);
      result.replaceChildren(element("p", { role: "status" }, "This service asks for an API key: enter it above."));
      return;
    }
    if (!response.ok) {
      showProblem(form, result, await problemOf(response));
      return;
    }
    if (accept === MARKDOWN) {
      showText(result, await response.text(), "Markdown for the workpaper");
    } else if (accept !== JSON_TYPE) {
      await download(result, response, filename || "answer");
    } else {
      const answer = await response.json();
      showDocument(result, answer);
      await addCharts(form, result, path, body, answer, file);
    }
    const heading = result.querySelector(".result-heading");
    if (heading) heading.focus();
  }

  async function addCharts(form, result, path, body, answer, file) {
    if (!form) return;
    if (form.dataset.curve && answer.curve_request && answer.links && answer.links.curve) {
      const response = await call(answer.links.curve, answer.curve_request, SVG);
      if (response.ok) {
        await showChart(result, response,
          "Operating characteristic of the plan: the probability of relying on the control at each true deviation rate.");
      }
    }
    if (form.dataset.chart) {
      // The chart of an uploaded sheet is drawn from the same sheet, sent again.
      const response = await call(path, body, SVG, file);
      if (response.ok) {
        await showChart(result, response, "The misstatement limits against the tolerable misstatement.");
      }
    }
  }

  // ------------------------------------------------------------------ the API key

  function askForKey(message) {
    const panel = document.getElementById("key-panel");
    const input = document.getElementById("api-key");
    document.getElementById("api-key-error").textContent = message || "";
    panel.hidden = false;
    input.value = "";
    input.focus();
  }

  function useKey(event) {
    event.preventDefault();
    const input = document.getElementById("api-key");
    const key = input.value.trim();
    if (!key) {
      document.getElementById("api-key-error").textContent = "API key: enter the key you were given.";
      input.setAttribute("aria-invalid", "true");
      return;
    }
    input.removeAttribute("aria-invalid");
    apiKey = key;
    input.value = "";
    document.getElementById("key-panel").hidden = true;
    const again = waitingForKey;
    waitingForKey = null;
    if (again) again();
  }

  // ------------------------------------------------------------------ views

  function showView() {
    const wanted = (location.hash || "#size").slice(1);
    const views = document.querySelectorAll(".view");
    const known = Array.from(views).some((view) => view.id === wanted);
    const id = known ? wanted : "size";
    views.forEach((view) => { view.hidden = view.id !== id; });
    document.querySelectorAll(".tabs a").forEach((link) => {
      if (link.getAttribute("href") === `#${id}`) link.setAttribute("aria-current", "page");
      else link.removeAttribute("aria-current");
    });
    return document.getElementById(id);
  }

  function choosePopulationKind(form) {
    const kind = form.querySelector('input[name="population-kind"]:checked').value;
    form.querySelectorAll("fieldset[data-kind]").forEach((set) => {
      const on = set.dataset.kind === kind;
      set.hidden = !on;
      set.disabled = !on;
    });
  }

  // One CSV line (RFC 4180 quoting) as its fields.
  function csvFields(line) {
    const fields = [];
    let current = "";
    let quoted = false;
    for (let i = 0; i < line.length; i += 1) {
      const c = line[i];
      if (quoted) {
        if (c === '"' && line[i + 1] === '"') {
          current += '"';
          i += 1;
        } else if (c === '"') {
          quoted = false;
        } else {
          current += c;
        }
      } else if (c === '"') {
        quoted = true;
      } else if (c === ",") {
        fields.push(current.trim());
        current = "";
      } else {
        current += c;
      }
    }
    fields.push(current.trim());
    return fields;
  }

  // The first two columns of a CSV file (after its header line) as "identifier, amount"
  // lines, amounts as written: one the service cannot read is named in its answer.
  function fillFromCsv(input) {
    const target = document.getElementById(input.dataset.fills);
    const file = input.files && input.files[0];
    if (!file) return;
    file.text().then((text) => {
      const rows = lines(text).slice(1).map((line) => csvFields(line).slice(0, 2).join(", "));
      target.value = rows.join("\n");
    });
  }

  // ------------------------------------------------------------------ any operation

  const operations = new Map();

  function resolve(spec, schema) {
    let current = schema || {};
    while (current.$ref) {
      current = current.$ref.replace(/^#\//, "").split("/").reduce((node, key) => node[key], spec);
    }
    return current;
  }

  // A request to start from: the required fields and those with an example, filled in.
  function exampleOf(spec, given, depth) {
    const schema = resolve(spec, given);
    if (schema.example !== undefined) return schema.example;
    if (schema.default !== undefined && schema.default !== null) return schema.default;
    if (schema.enum) return schema.enum[0];
    const options = schema.oneOf || schema.anyOf;
    if (options) return exampleOf(spec, options[0], depth);
    const type = Array.isArray(schema.type) ? schema.type.find((t) => t !== "null") : schema.type;
    if (type === "object" || schema.properties) {
      const out = {};
      if (depth > 4) return out;
      const required = schema.required || [];
      Object.entries(schema.properties || {}).forEach(([name, property]) => {
        const resolved = resolve(spec, property);
        if (required.includes(name) || resolved.example !== undefined) {
          out[name] = exampleOf(spec, property, depth + 1);
        }
      });
      return out;
    }
    if (type === "array") return depth > 4 ? [] : [exampleOf(spec, schema.items, depth + 1)];
    if (type === "integer") return schema.minimum !== undefined ? schema.minimum : 1;
    if (type === "number") return schema.minimum !== undefined ? schema.minimum : 0.05;
    if (type === "boolean") return false;
    return "";
  }

  async function loadOperations() {
    const select = document.getElementById("any-operation");
    const response = await fetch("/openapi.json", { headers: { Accept: JSON_TYPE } });
    if (!response.ok) return;
    const spec = await response.json();
    // Starting requests written by hand, for operations whose fields depend on each other
    // (one of several population forms, stages that must agree); the others are made from
    // the schema, so that a new operation needs nothing here.
    const written = await fetch("/ui/examples.json").then((r) => (r.ok ? r.json() : {}), () => ({}));
    Object.entries(spec.paths).forEach(([path, item]) => {
      const operation = item.post;
      if (!operation) return;
      const content = operation.requestBody.content;
      const okContent = ((operation.responses || {})["200"] || {}).content || {};
      operations.set(path, {
        path,
        summary: operation.summary,
        description: operation.description || "",
        example: written[path] || exampleOf(spec, (content[JSON_TYPE] || {}).schema, 0),
        multipart: Boolean(content["multipart/form-data"]),
        answers: Object.keys(okContent),
      });
      select.appendChild(element("option", { value: path }, `${operation.summary} — POST ${path}`));
    });
    chooseOperation();
  }

  function chooseOperation() {
    const chosen = operations.get(document.getElementById("any-operation").value);
    if (!chosen) return;
    document.getElementById("any-description").textContent = chosen.description;
    document.getElementById("any-body").value = JSON.stringify(chosen.example, null, 2);
    document.getElementById("any-file-field").hidden = !chosen.multipart;
    document.getElementById("any-file").value = "";
    const accept = document.getElementById("any-accept");
    accept.replaceChildren(...chosen.answers.map((type) => element("option", { value: type }, type)));
    clearErrors(document.getElementById("any-form"), document.querySelector("#any .result"));
  }

  function sendAny(event) {
    event.preventDefault();
    const form = event.currentTarget;
    const result = form.nextElementSibling;
    clearErrors(form, result);
    const chosen = operations.get(document.getElementById("any-operation").value);
    let body;
    try {
      body = JSON.parse(document.getElementById("any-body").value);
    } catch (error) {
      showProblem(form, result, { title: "Invalid input", status: "not sent", errors: { body: [`not JSON: ${error.message}`] } });
      return;
    }
    const fileInput = document.getElementById("any-file");
    const file = chosen.multipart && fileInput.files.length ? fileInput.files[0] : null;
    const accept = document.getElementById("any-accept").value || JSON_TYPE;
    const extension = { "text/csv": "csv", "text/markdown": "md", "image/svg+xml": "svg" }[accept] || "xlsx";
    if (accept === SVG) {
      exchangeChart(form, result, chosen.path, body);
      return;
    }
    exchange(form, result, chosen.path, body, accept, file, `answer.${extension}`);
  }

  async function exchangeChart(form, result, path, body) {
    const response = await call(path, body, SVG);
    if (response.status === 401) {
      waitingForKey = () => exchangeChart(form, result, path, body);
      askForKey(apiKey ? "The service does not accept this key; enter another." : null);
      return;
    }
    if (!response.ok) {
      showProblem(form, result, await problemOf(response));
      return;
    }
    result.replaceChildren(element("h3", { tabindex: "-1", class: "result-heading" }, "Chart"));
    await showChart(result, response, "The chart the service drew for this request.");
  }

  // ------------------------------------------------------------------ start

  function start() {
    document.querySelectorAll("form[data-operation]").forEach((form) => {
      form.addEventListener("submit", (event) => {
        event.preventDefault();
        send(form, JSON_TYPE);
      });
      form.querySelectorAll("button[data-accept]").forEach((button) => {
        button.addEventListener("click", () => send(form, button.dataset.accept, button.dataset.filename));
      });
      form.querySelectorAll('input[name="population-kind"]').forEach((radio) => {
        radio.addEventListener("change", () => choosePopulationKind(form));
      });
      if (form.querySelector('input[name="population-kind"]')) choosePopulationKind(form);
    });
    document.querySelectorAll("input[data-fills]").forEach((input) => {
      input.addEventListener("change", () => fillFromCsv(input));
    });
    document.getElementById("key-form").addEventListener("submit", useKey);
    document.getElementById("any-form").addEventListener("submit", sendAny);
    document.getElementById("any-operation").addEventListener("change", chooseOperation);
    window.addEventListener("hashchange", () => {
      const view = showView();
      const heading = view.querySelector("h2");
      if (heading) heading.focus();
    });
    showView();
    loadOperations();
  }

  start();
}());
