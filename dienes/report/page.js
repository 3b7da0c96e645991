// Sorting and filtering of the ranking table; inlined into report.html at render time.
(function(){
  var table=document.getElementById('ranking');
  var body=table.tBodies[0];
  function apply(){
    var st=document.getElementById('f-status').value, cl=document.getElementById('f-class').value,
        dm=document.getElementById('f-domain').value, q=document.getElementById('f-text').value.toLowerCase();
    var shown=0;
    Array.prototype.forEach.call(body.rows,function(r){
      var ok=(!st||r.dataset.status===st)&&(!cl||r.dataset.class===cl)&&(!dm||r.dataset.domain===dm)
             &&(!q||r.textContent.toLowerCase().indexOf(q)>=0);
      r.style.display=ok?'':'none'; if(ok){shown++;}
    });
    document.getElementById('f-count').textContent=shown+' of '+body.rows.length+' rows shown';
  }
  ['f-status','f-class','f-domain'].forEach(function(id){document.getElementById(id).addEventListener('change',apply);});
  document.getElementById('f-text').addEventListener('input',apply);
  document.getElementById('f-allcols').addEventListener('change',function(e){
    document.body.classList.toggle('allcols',e.target.checked);});
  document.getElementById('f-drawings').addEventListener('change',function(e){
    document.body.classList.toggle('nodrawings',!e.target.checked);});
  Array.prototype.forEach.call(table.tHead.rows[0].cells,function(th,k){
    if(!th.classList.contains('sortable')){return;}
    th.addEventListener('click',function(){
      var asc=th.dataset.order!=='asc'; th.dataset.order=asc?'asc':'desc';
      var rows=Array.prototype.slice.call(body.rows);
      rows.sort(function(a,b){
        var x=a.cells[k].dataset.sort||a.cells[k].textContent, y=b.cells[k].dataset.sort||b.cells[k].textContent;
        var fx=parseFloat(x), fy=parseFloat(y);
        var nx=isNaN(fx), ny=isNaN(fy);
        if(nx&&ny){return asc?x.localeCompare(y):y.localeCompare(x);}
        if(nx){return 1;} if(ny){return -1;}
        return asc?fx-fy:fy-fx;
      });
      rows.forEach(function(r){body.appendChild(r);});
    });
  });
  apply();
})();
