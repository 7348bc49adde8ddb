// Invented sample data for the theme preview: the outline of an invented study area.
// The first ring runs counter-clockwise (as RFC 7946 asks), the second clockwise, to check that
// both are filled as small areas.
window.AtlasData = window.AtlasData || {};
window.AtlasData.basemap = {
  "type": "FeatureCollection",
  "features": [
    {"type": "Feature", "properties": {"name": "Saltmarrow uplands (invented)"},
     "geometry": {"type": "Polygon", "coordinates": [[
       [2.0, 44.5], [5.3, 44.3], [5.6, 45.6], [4.6, 46.5], [2.9, 46.9], [1.8, 46.0], [2.0, 44.5]]]}},
    {"type": "Feature", "properties": {"name": "Tessal islets (invented)"},
     "geometry": {"type": "MultiPolygon", "coordinates": [[[
       [6.0, 45.0], [6.2, 45.4], [6.5, 45.1], [6.0, 45.0]]]]}}
  ]
};
