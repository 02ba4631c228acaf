// Served only by `stet watch`, never written into a report: keeps the open page in
// step with the latest build through the server's event stream.
(() => {
  "use strict";
  const report = document.getElementById("stet-live-report");
  const problem = document.getElementById("stet-live-problem");
  const notice = document.getElementById("stet-live-notice");
  const progress = document.getElementById("stet-live-progress");

  // The step at the top of the window (the first whose bottom is below it) and where
  // its top sits, so the reader stays at the step they were reading when the report
  // above it grows or shrinks. Only steps: an element without a box of its own (a
  // chart's clip path) would read as being at the top.
  function anchor() {
    for (const element of report.querySelectorAll("section[id]")) {
      const box = element.getBoundingClientRect();
      if (box.bottom > 0) {
        return { id: element.id, top: box.top };
      }
    }
    return null;
  }

  function restore(mark, scrolled) {
    const element = mark && document.getElementById(mark.id);
    if (element) {
      window.scrollBy(0, element.getBoundingClientRect().top - mark.top);
    } else {
      window.scrollTo(0, scrolled);
    }
  }

  function show(element, text) {
    element.textContent = text;
    element.hidden = text === "";
  }

  const events = new EventSource("/events");
  // The first line is the report's version; the rest is its body.
  events.addEventListener("report", (event) => {
    const split = event.data.indexOf("\n");
    const version = event.data.slice(0, split);
    if (version === report.dataset.version) {
      return;
    }
    const mark = anchor();
    const scrolled = window.scrollY;
    report.innerHTML = event.data.slice(split + 1);
    report.dataset.version = version;
    restore(mark, scrolled);
  });
  events.addEventListener("problem", (event) => show(problem, event.data));
  events.addEventListener("notice", (event) => show(notice, event.data));
  events.addEventListener("progress", (event) => show(progress, event.data));
})();
