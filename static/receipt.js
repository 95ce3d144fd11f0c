// The receipt sheet: a refused row (422, field-level messages) is swapped in like a saved one,
// so that the technician sees the messages at the fields; htmx leaves 4xx answers unswapped.
document.addEventListener("htmx:beforeSwap", function (event) {
  if (event.detail.xhr.status === 422 && event.detail.target && event.detail.target.id === "receipt") {
    event.detail.shouldSwap = true;
    event.detail.isError = false;
  }
});
