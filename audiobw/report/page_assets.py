"""What report.html carries besides its content: the Content-Security-Policy, the stylesheet and the
inline script (the sortable case table and the ``?selftest`` report read by tests/test_report_browser.py)."""

from __future__ import annotations

CSP = (
    "default-src 'none'; img-src data:; media-src 'self' file:; style-src 'unsafe-inline'; "
    "script-src 'unsafe-inline'; base-uri 'none'; form-action 'none'"
)

STYLE = """
:root{--ink:#1d2433;--muted:#5b6270;--paper:#fbfaf7;--rule:#d9d6cf;--accent:#213a6b;--amber:#e0a526;--bad:#7c2e6b}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);font:15px/1.45 system-ui,-apple-system,"Segoe UI",sans-serif}
main{max-width:1180px;margin:0 auto;padding:1.2rem 1.4rem 3rem}
h1{font-size:1.55rem;margin:.2rem 0 .3rem;letter-spacing:-.01em}
h2{font-size:1.15rem;margin:1.8rem 0 .5rem;border-bottom:2px solid var(--ink);padding-bottom:.15rem}
h3{font-size:1rem;margin:1.2rem 0 .4rem}
.meta{color:var(--muted);font-size:.9rem;margin:.1rem 0;overflow-wrap:anywhere}
.caution{border-left:6px solid var(--amber);background:#fff;padding:.55rem .8rem;margin:.8rem 0;font-size:.92rem}
.verdict{border:2px solid var(--accent);background:#fff;padding:.7rem .9rem;margin:.9rem 0}
.verdict.none{border-color:var(--bad);border-style:dashed}
.verdict strong{font-size:1.05rem}
.grid{display:grid;grid-template-columns:minmax(0,1fr) minmax(0,1fr);gap:1.4rem}
@media (max-width:820px){.grid{grid-template-columns:1fr}}
table{border-collapse:collapse;width:100%;font-size:.9rem;background:#fff}
th,td{border-bottom:1px solid var(--rule);padding:.28rem .5rem;text-align:left;vertical-align:top}
td.v,td.n{font-variant-numeric:tabular-nums}
td.n{white-space:nowrap}
#spec-table td:first-child{width:50%}
td.n{text-align:right}
tr.sec th{background:var(--ink);color:var(--paper);font-weight:600;font-size:.82rem;letter-spacing:.04em;text-transform:uppercase}
tr.binding td{font-weight:700}
tr.binding td:first-child::before{content:"▶ "}
figure{margin:1.2rem 0;background:#fff;border:1px solid var(--rule);padding:.6rem}
figure img{max-width:100%;height:auto;display:block;margin:0 auto}
figcaption{font-size:.86rem;color:var(--muted);margin-top:.35rem}
.cases{max-height:34rem;overflow:auto;border:1px solid var(--rule)}
.cases table{font-size:.8rem}
.cases thead th{position:sticky;top:0;background:#eeece6;z-index:1}
.cases th button{font:inherit;font-weight:600;background:none;border:0;padding:0;cursor:pointer;color:inherit;text-align:left}
.cases th[aria-sort=ascending] button::after{content:" ▲"}
.cases th[aria-sort=descending] button::after{content:" ▼"}
.cases tr.subject td{background:#fdf1d6;font-weight:700}
.cases td.miss{text-decoration:underline wavy var(--bad);font-weight:700}
.clip{display:flex;flex-wrap:wrap;gap:.4rem 1rem;align-items:center;margin:.3rem 0}
.clip code{word-break:break-all}
footer{margin-top:2rem;color:var(--muted);font-size:.82rem}
"""

SCRIPT = r"""
(function(){
  function cellKey(td){var s=td.getAttribute('data-sort');if(s===null){return td.textContent.trim().toLowerCase();}
    return s===''?-Infinity:parseFloat(s);}
  function sortBy(table,col,dir){
    var body=table.tBodies[0],rows=Array.prototype.slice.call(body.rows);
    rows.sort(function(a,b){var x=cellKey(a.cells[col]),y=cellKey(b.cells[col]);
      if(x<y){return -dir;} if(x>y){return dir;} return 0;});
    rows.forEach(function(r){body.appendChild(r);});
    Array.prototype.forEach.call(table.tHead.rows[0].cells,function(th,i){
      th.setAttribute('aria-sort',i===col?(dir>0?'ascending':'descending'):'none');});
  }
  var table=document.getElementById('case-table');
  if(table){Array.prototype.forEach.call(table.tHead.rows[0].cells,function(th,i){
    var b=th.querySelector('button'); if(!b){return;}
    b.addEventListener('click',function(){sortBy(table,i,th.getAttribute('aria-sort')==='ascending'?-1:1);});});}
  window.audiobwSortBy=sortBy;
  if(!/[?&]selftest\b/.test(location.search)){return;}
  var errors=[];
  window.addEventListener('error',function(e){errors.push('error: '+(e.message||(e.target&&e.target.src)||e.type));},true);
  document.addEventListener('securitypolicyviolation',function(e){errors.push('csp: '+e.violatedDirective+' '+e.blockedURI);});
  var origError=console.error;console.error=function(){errors.push('console: '+Array.prototype.join.call(arguments,' '));origError.apply(console,arguments);};
  var imgs=Array.prototype.map.call(document.images,function(img){
    return img.decode().then(function(){return {alt:img.alt,ok:true,w:img.naturalWidth,h:img.naturalHeight};},
                             function(){return {alt:img.alt,ok:false,w:0,h:0};});});
  var clips=Array.prototype.map.call(document.querySelectorAll('audio'),function(a){
    return new Promise(function(res){var done=false;function fin(ok){if(done){return;}done=true;
        res({src:a.getAttribute('src'),ok:ok,duration_s:isFinite(a.duration)?a.duration:null,error:a.error?a.error.code:null});}
      if(a.readyState>=1){fin(true);return;}
      a.addEventListener('loadedmetadata',function(){fin(true);});a.addEventListener('error',function(){fin(false);});
      setTimeout(function(){fin(a.readyState>=1);},8000);a.load();});});
  var sorted=null;
  if(table){var col=-1;Array.prototype.forEach.call(table.tHead.rows[0].cells,function(th,i){if(th.getAttribute('data-key')==='snr_a_db'){col=i;}});
    if(col>=0){sortBy(table,col,1);var vals=Array.prototype.map.call(table.tBodies[0].rows,function(r){return cellKey(r.cells[col]);});
      sorted={column:'snr_a_db',rows:vals.length,ascending:vals.every(function(v,i){return i===0||vals[i-1]<=v;})};
      var idcol=0;sortBy(table,idcol,1);}}
  Promise.all([Promise.all(imgs),Promise.all(clips)]).then(function(r){
    var specs=Array.prototype.map.call(document.querySelectorAll('[data-spec]'),function(e){
      return {key:e.getAttribute('data-spec'),value:e.getAttribute('data-value'),text:e.textContent};});
    var out=document.getElementById('selftest');
    out.textContent=JSON.stringify({images:r[0],audio:r[1],specs:specs,errors:errors,scripts:document.scripts.length,
      sorted:sorted,title:document.title,inputPath:(document.getElementById('input-path')||{}).textContent});
    out.setAttribute('data-done','1');});
})();
"""
