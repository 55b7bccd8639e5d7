"""Static parts of the offline map page: Leaflet, the page's stylesheet and its script.

:func:`leaflet_assets` reads Leaflet's script and stylesheet from the installed ``xstatic-leaflet``
package (package data; the only files the render layer reads) and inlines the stylesheet's images as
data URIs.  :data:`PAGE_CSS` and :data:`PAGE_JS` are the page's own stylesheet and script, which draw
the layers from the JSON data block that :func:`courseplan.render.webmap.render_map_html` embeds.

Notes
-----
Data in: the installed ``xstatic-leaflet`` files.  Out: ``str`` (JavaScript and CSS, safe to put
inside ``<script>`` and ``<style>`` elements).  ``PAGE_CSS`` holds the placeholder ``__BG__`` for the
map background colour.
"""

from __future__ import annotations

import base64


def leaflet_assets() -> tuple[str, str]:
    """Leaflet's JS and CSS from the xstatic-leaflet wheel, with the CSS's images as data URIs."""
    from pathlib import Path

    import xstatic.pkg.leaflet as xl

    base = Path(xl.BASE_DIR)
    js = (base / "leaflet.js").read_text(encoding="utf-8")
    js = "\n".join(line for line in js.splitlines() if not line.startswith("//# sourceMappingURL"))
    css = (base / "leaflet.css").read_text(encoding="utf-8")
    for name in ("layers.png", "layers-2x.png", "marker-icon.png"):
        data = base64.b64encode((base / "images" / name).read_bytes()).decode("ascii")
        css = css.replace(f"url(images/{name})", f"url(data:image/png;base64,{data})")
    js = js.replace("</script", "<\\/script")
    return js, css


PAGE_CSS = """
html,body{height:100%;margin:0}
body{font:14px/1.4 system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;color:#1d2321;background:#fff}
#wrap{display:flex;height:100%}
#side{width:340px;flex:none;overflow:auto;padding:10px 14px 16px;box-sizing:border-box;background:#fafaf6;
 border-right:1px solid #c9cbc2}
#map{flex:1;min-width:0;background:__BG__}
h1{font-size:17px;margin:2px 0 4px}
h2{font-size:13px;margin:12px 0 4px;color:#4a504b}
.sub{color:#4a504b;margin:0 0 6px}
.cautions{margin:0;padding-left:18px}
.cautions{font-size:12.5px;line-height:1.35}
.cautions li{margin:0 0 3px}
.warn{background:#fff3d6;border:1px solid #e2c37a;border-radius:4px;padding:6px 8px;margin:8px 0}
.legend .row{display:flex;align-items:center;gap:6px;margin:2px 0}
.maplegend{background:rgba(255,255,255,.93);border:1px solid #9a9d95;border-radius:4px;padding:4px 8px;
 max-height:55vh;overflow:auto;font-size:12px;max-width:260px}
.maplegend summary{cursor:pointer;font-weight:600}
.maplegend h2{font-size:11px;margin:6px 0 2px}
.maplegend .note{font-size:11px}
.sw{display:inline-block;width:22px;height:13px;border:1px solid #7d8079;flex:none}
.dot{display:inline-block;width:11px;height:11px;border-radius:50%;border:2px solid #1b2f4a;flex:none}
.ramp{height:12px;border:1px solid #7d8079;margin:2px 0}
.note{color:#5a605b;font-size:12px}
.pop h3{font-size:15px;margin:0 0 2px}
.pop .verdict{display:inline-block;font-size:12px;font-weight:600;padding:0 6px;border-radius:3px;
 background:#e8ebe4;border:1px solid #b8bcb3;margin:0 0 6px}
.pop table.lead{font-size:13.5px;margin:0 0 4px}
.pop table.lead td.k{font-weight:600;color:#2f3530}
.pop details{margin-top:4px;border-top:1px solid #d5d8d0;padding-top:3px}
.pop details summary{cursor:pointer;font-size:12px;color:#4a504b}
.pop td.v{overflow-wrap:anywhere}
.leaflet-popup-content{max-width:calc(100vw - 80px)}
.sw.hatch{background:repeating-linear-gradient(45deg,#4d524c 0 2px,#eef0ea 2px 5px);border-color:#2b2f2a}
.sw.nosalt{background:repeating-linear-gradient(45deg,#9b1c1c 0 1.5px,#fff 1.5px 4px),repeating-linear-gradient(-45deg,#9b1c1c 0 1.5px,transparent 1.5px 4px);border-color:#9b1c1c}
.pop h4{font-size:11px;margin:6px 0 2px;text-transform:uppercase;color:#4a504b}
.pop table{border-collapse:collapse;font-size:12px}
.pop td{padding:0 6px 0 0;vertical-align:top}
.pop td.k{color:#4a504b;white-space:nowrap}
.pop .note{white-space:pre-wrap;max-width:260px}
.lbl{background:rgba(255,255,255,.85);border:1px solid #555;font-weight:600;padding:0 4px}
.leaflet-tooltip.zlbl{background:none;border:0;box-shadow:none;padding:0;font-weight:700;font-size:12px;
 color:#111;text-shadow:0 0 2px #fff,0 0 2px #fff,0 0 3px #fff}
.leaflet-tooltip.zlbl:before{display:none}
@media (max-width:760px){
 #wrap{flex-direction:column;height:auto}
 #map{flex:none;height:68vh;order:1}
 #side{width:auto;order:2;border-right:0;border-top:1px solid #c9cbc2;overflow:visible}
}
@media print{
 @page{size:A4 portrait;margin:10mm}
 html,body{height:auto;background:#fff}
 body{font-size:9pt}
 #wrap{display:flex;flex-direction:column;height:auto}
 #side{display:contents}
 #side h1{order:0;font-size:14pt;margin:0}
 #side .sub{order:1;margin:0 0 2mm}
 #map{order:2;flex:none;width:190mm;height:150mm;border:1px solid #7d8079;break-inside:avoid}
 #legend{order:3;column-count:3;column-gap:6mm;margin-top:2mm}
 #legend h2{font-size:8.5pt;margin:0 0 1mm;break-after:avoid}
 #legend .row{margin:0;font-size:8pt;break-inside:avoid}
 .warn{order:4;margin:2mm 0 0;padding:1mm 2mm;break-inside:avoid}
 .cautions{font-size:7.5pt;line-height:1.2;columns:2;column-gap:6mm}
 #side>p.note{order:5;font-size:7pt}
 .leaflet-control-zoom,.leaflet-control-layers,.leaflet-control-attribution,.maplegend,
 .leaflet-popup-pane{display:none!important}
 .leaflet-control-scale{display:block!important}
 .sw,.dot,.ramp,.lbl,.zlbl{-webkit-print-color-adjust:exact;print-color-adjust:exact}
 #map,#map *{-webkit-print-color-adjust:exact;print-color-adjust:exact}
}
"""

PAGE_JS = r"""
(function(){
"use strict";
var D = JSON.parse(document.getElementById("plan-data").textContent);
function el(tag, cls, text){var e=document.createElement(tag); if(cls){e.className=cls;}
  if(text!==undefined&&text!==null){e.textContent=String(text);} return e;}
function table(rows){var t=el("table"); rows.forEach(function(r){var tr=el("tr");
  tr.appendChild(el("td","k",r[0])); tr.appendChild(el("td","v",r[1])); t.appendChild(tr);}); return t;}
function zonePopup(p){var d=el("div","pop"); d.appendChild(el("h3",null,p.title||("Zone "+p.id)));
  d.appendChild(el("div","verdict",p.verdict));
  if(p.lead&&p.lead.length){var t=table(p.lead); t.className="lead"; d.appendChild(t);}
  var det=el("details"); det.appendChild(el("summary",null,"All values of zone "+p.id));
  p.sections.forEach(function(s){det.appendChild(el("h4",null,s[0])); det.appendChild(table(s[1]));});
  d.appendChild(det); return d;}
function popW(w){return Math.max(200, Math.min(w, window.innerWidth-70));}
function obsPopup(p){var d=el("div","pop"); d.appendChild(el("h3",null,"Observation "+p.id));
  d.appendChild(table(p.rows));
  if(p.note){d.appendChild(el("h4",null,"note")); d.appendChild(el("div","note",p.note));}
  return d;}
var map = L.map("map", {zoomSnap:0.25, attributionControl:false, preferCanvas:false});
L.control.scale({imperial:false, maxWidth:160}).addTo(map);
var overlays = {}, base = {}, byZone = {}, byObs = {};
if (D.context){
  var ctx = L.imageOverlay(D.context.uri, D.context.bounds, {opacity:D.context.opacity, interactive:false});
  ctx.addTo(map); overlays[D.context.name] = ctx;
}
function zoneLayer(colourKey, register, hatch){
  return L.geoJSON(D.zones, {
    style:function(f){var p=f.properties;
      if(hatch && p.treated===false){return {color:"#1f231e", weight:1.6, opacity:1, dashArray:"4 3",
                                              fillColor:"url(#cp-hatch)", fillOpacity:0.95};}
      return {color:"#3b3f3a", weight:0.7, opacity:0.9, fillColor:p[colourKey], fillOpacity:D.fillOpacity};},
    onEachFeature:function(f, layer){
      layer.bindPopup(function(){return zonePopup(f.properties);},
                      {maxWidth:popW(340), minWidth:Math.min(220, popW(340)), maxHeight:440});
      if(register){byZone[String(f.properties.id)] = layer;}}
  });
}
var zDose = zoneLayer("c_dose", true, true), zVerdict = zoneLayer("c_verdict", false, false);
base["Zones by dose"] = zDose; base["Zones by verdict"] = zVerdict; zDose.addTo(map);
var zlabels = L.layerGroup();
D.zones.features.forEach(function(f){var p=f.properties; if(!p.at){return;}
  L.circleMarker(p.at, {radius:0, stroke:false, fill:false, interactive:false})
    .bindTooltip(el("span",null,p.label), {permanent:true, direction:"center", className:"zlbl"})
    .addTo(zlabels);});
zlabels.addTo(map); overlays["Zone labels"] = zlabels;
var course = L.layerGroup();
if (D.course){ L.geoJSON(D.course, {interactive:false, style:function(){return {color:"#111", weight:1.3,
  fill:false, dashArray:null};}}).addTo(course); }
[["start","Start","#1a7f37"],["finish","Finish","#b3261e"]].forEach(function(s){
  if (D[s[0]]){ L.circleMarker(D[s[0]], {radius:7, color:"#fff", weight:2, fillColor:s[2], fillOpacity:1})
    .bindTooltip(el("span",null,s[1]), {permanent:true, direction:"right", className:"lbl"})
    .addTo(course);}});
course.addTo(map); overlays["Course, start and finish"] = course;
if (D.crews){
  var crews = L.geoJSON(D.crews, {
    style:function(f){return {color:f.properties.colour, weight:2, dashArray:"5 4", fill:false};},
    onEachFeature:function(f, layer){layer.bindTooltip(el("span",null,f.properties.label),
      {permanent:true, direction:"center", className:"lbl"});}
  });
  crews.addTo(map); overlays["Crews"] = crews;
}
if (D.nosalt){
  var nos = L.geoJSON(D.nosalt, {interactive:true,
    style:function(){return {color:"#9b1c1c", weight:1.6, fillColor:"url(#cp-nosalt)", fillOpacity:0.95};},
    onEachFeature:function(f, layer){layer.bindTooltip(el("span",null,"No salt: "+f.properties.name+" ("+
      f.properties.area+")"), {sticky:true, className:"lbl"});}
  });
  nos.addTo(map); overlays["No-salt areas"] = nos;
}
if (D.obs){
  var obs = L.geoJSON(D.obs, {
    pointToLayer:function(f, ll){return L.circleMarker(ll, {radius:6, color:"#1b2f4a", weight:2,
      fillColor:f.properties.colour, fillOpacity:1});},
    onEachFeature:function(f, layer){
      layer.bindPopup(function(){return obsPopup(f.properties);}, {maxWidth:popW(300), maxHeight:420});
      byObs[String(f.properties.id)] = layer;}
  });
  obs.addTo(map); overlays["Observations"] = obs;
}
L.control.layers(base, overlays, {collapsed:window.innerWidth<760}).addTo(map);
var Legend = L.Control.extend({options:{position:"bottomright"}, onAdd:function(){
  var box = L.DomUtil.create("details", "maplegend");
  var sm = el("summary", null, "Legend"); box.appendChild(sm);
  var copy = document.getElementById("legend").cloneNode(true); copy.removeAttribute("id");
  box.appendChild(copy);
  L.DomEvent.disableClickPropagation(box); L.DomEvent.disableScrollPropagation(box); return box;}});
new Legend().addTo(map);
map.fitBounds(D.bounds, {padding:[12,12]});
function openFromHash(){
  var m = /^#(zone|obs)=(.+)$/.exec(window.location.hash); if(!m){return;}
  var key = decodeURIComponent(m[2]); var layer = (m[1]==="zone" ? byZone : byObs)[key];
  if(!layer){return;}
  var at = layer.getBounds ? layer.getBounds().getCenter() : layer.getLatLng();
  map.panTo(at, {animate:false});  // centre it first, so the whole popup is on a small screen at once
  layer.openPopup(at);
}
window.addEventListener("hashchange", openFromHash); openFromHash();
function refit(){map.invalidateSize({animate:false, pan:false});
  map.fitBounds(D.bounds, {padding:[12,12], animate:false});}
window.addEventListener("beforeprint", refit); window.addEventListener("afterprint", refit);
if(window.matchMedia){var mq=window.matchMedia("print");
  if(mq.addEventListener){mq.addEventListener("change", refit);}
  else if(mq.addListener){mq.addListener(refit);}}
window.courseplanMap = map;
})();
"""


__all__ = ["PAGE_CSS", "PAGE_JS", "leaflet_assets"]
