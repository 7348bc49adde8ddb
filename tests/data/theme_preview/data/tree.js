// Invented sample data for the theme preview (an invented study of oil lamps).
window.AtlasData = window.AtlasData || {};
window.AtlasData.tree = {
 "nodes": [
  {
   "id": "lamp-01",
   "kind": "tip",
   "x": 10,
   "y": 0,
   "parent": 2,
   "label": "Lamp with a ribbed spout",
   "href": "objects/lamp-01.html",
   "support": null,
   "withheld": false
  },
  {
   "id": "lamp-02",
   "kind": "tip",
   "x": 9,
   "y": 1,
   "parent": 2,
   "label": "Lamp with a pinched spout",
   "href": "objects/lamp-02.html",
   "support": null,
   "withheld": false
  },
  {
   "id": "n-4cc6f88855",
   "kind": "node",
   "x": 7,
   "y": 0.5,
   "parent": 8,
   "label": "Clade of 2 objects",
   "href": "nodes/n-4cc6f88855.html",
   "support": 0.62,
   "withheld": false
  },
  {
   "id": "lamp-03",
   "kind": "tip",
   "x": 10,
   "y": 2,
   "parent": 7,
   "label": "Lamp with twin handles",
   "href": "objects/lamp-03.html",
   "support": null,
   "withheld": false
  },
  {
   "id": "lamp-04",
   "kind": "tip",
   "x": 9,
   "y": 3,
   "parent": 6,
   "label": "Lamp with a leaf-shaped shoulder",
   "href": "objects/lamp-04.html",
   "support": null,
   "withheld": false
  },
  {
   "id": "lamp-05",
   "kind": "tip",
   "x": 10,
   "y": 4,
   "parent": 6,
   "label": "Lamp with a <grooved> rim & base",
   "href": "objects/lamp-05.html",
   "support": null,
   "withheld": false
  },
  {
   "id": "n-c372a702f7",
   "kind": "node",
   "x": 8,
   "y": 3.5,
   "parent": 7,
   "label": "Clade of 2 objects",
   "href": "nodes/n-c372a702f7.html",
   "support": 0.88,
   "withheld": false
  },
  {
   "id": "n-dcad713c3a",
   "kind": "node",
   "x": 5,
   "y": 2.75,
   "parent": 8,
   "label": "Clade of 3 objects",
   "href": "nodes/n-dcad713c3a.html",
   "support": 1.0,
   "withheld": false
  },
  {
   "id": "n-74617f8284",
   "kind": "node",
   "x": 3,
   "y": 1.625,
   "parent": 13,
   "label": "Clade of 5 objects",
   "href": "nodes/n-74617f8284.html",
   "support": 0.97,
   "withheld": false
  },
  {
   "id": "lamp-06",
   "kind": "tip",
   "x": 9,
   "y": 5,
   "parent": 11,
   "label": "Hanging lamp, three chains",
   "href": "objects/lamp-06.html",
   "support": null,
   "withheld": false
  },
  {
   "id": "lamp-07",
   "kind": "tip",
   "x": 11,
   "y": 6,
   "parent": 11,
   "label": "Withheld object",
   "href": "objects/lamp-07.html",
   "support": null,
   "withheld": true
  },
  {
   "id": "n-e26a8471fa",
   "kind": "node",
   "x": 5,
   "y": 5.5,
   "parent": 13,
   "label": "Clade of 2 objects",
   "href": "nodes/n-e26a8471fa.html",
   "support": 0.71,
   "withheld": false
  },
  {
   "id": "lamp-08",
   "kind": "tip",
   "x": 9,
   "y": 7,
   "parent": 13,
   "label": "Open saucer lamp",
   "href": "objects/lamp-08.html",
   "support": null,
   "withheld": false
  },
  {
   "id": "n-34d227d7a3",
   "kind": "node",
   "x": 0,
   "y": 4.708333333333333,
   "parent": -1,
   "label": "Clade of 8 objects",
   "href": "nodes/n-34d227d7a3.html",
   "support": null,
   "withheld": false
  }
 ],
 "x_title": "Changes",
 "outgroup": [
  "lamp-08"
 ]
};
