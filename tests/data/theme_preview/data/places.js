// Invented sample data for the theme preview: invented places of an invented study of oil lamps.
// The coordinates are arbitrary points chosen for the preview; no real site is meant.
window.AtlasData = window.AtlasData || {};
window.AtlasData.places = [
  {"id": "tessal-cove", "name": "Tessal Cove", "lat": 45.42, "lon": 3.15,
   "href": "places/tessal-cove.html", "precision": "exact",
   "objects": [
     {"id": "lamp-01", "title": "Lamp with a ribbed spout", "href": "objects/lamp-01.html", "clade_colour": 0},
     {"id": "lamp-02", "title": "Lamp with a pinched spout", "href": "objects/lamp-02.html", "clade_colour": 0},
     {"id": "lamp-03", "title": "Lamp with twin handles", "href": "objects/lamp-03.html", "clade_colour": 0}]},
  {"id": "orrin-ford", "name": "Orrin Ford", "lat": 46.10, "lon": 4.02,
   "href": "places/orrin-ford.html", "precision": "exact",
   "objects": [
     {"id": "lamp-04", "title": "Lamp with a leaf-shaped shoulder", "href": "objects/lamp-04.html", "clade_colour": 1},
     {"id": "lamp-05", "title": "Lamp with a <grooved> rim & base", "href": "objects/lamp-05.html", "clade_colour": 2}]},
  {"id": "high-marrow", "name": "High Marrow", "lat": 44.71, "lon": 4.86,
   "href": "places/high-marrow.html", "precision": "generalised",
   "objects": [
     {"id": "lamp-06", "title": "Hanging lamp, three chains", "href": "objects/lamp-06.html", "clade_colour": 3}]},
  {"id": "keld-sands", "name": "Keld Sands", "lat": 45.05, "lon": 2.31,
   "href": "places/keld-sands.html", "precision": "exact",
   "objects": [
     {"id": "lamp-08", "title": "Open saucer lamp", "href": "objects/lamp-08.html", "clade_colour": null}]},
  {"id": "vell-quay", "name": "Vell Quay", "lat": 46.62, "lon": 2.88,
   "href": "places/vell-quay.html", "precision": "exact", "objects": []}
];
