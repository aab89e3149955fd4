# Writes mark.sql and bbox.sql, the pgbench scripts of the floor, from the
# PostgreSQL server log of one cairn serve whose --db URL named the
# database cairn_load_small and had log_statement=all, and which answered
# one mark page (/marks/TC-0000123) and then one bbox query
# (/collections/marks/items?bbox=-108,40,-107.95,40.05&limit=100&f=json):
#   python3 from-log.py postgresql.log
# The statements' indexes below are their places in that session's log.
import re,json,sys
lines=open(sys.argv[1]).read().split('\n')
ents=[];cur=None;mine=False
for l in lines:
    m=re.match(r'^\d{4}-\d\d-\d\d \S+ UTC \[\d+\] (\S+) (LOG|DETAIL|ERROR|STATEMENT):  (.*)$',l)
    if m:
        mine = m.group(1).endswith('@cairn_load_small')
        if not mine: cur=None; continue
        if m.group(2)=='LOG':
            cur={'sql':m.group(3),'params':None}; ents.append(cur)
        elif m.group(2)=='DETAIL' and cur: cur['params']=m.group(3)
    elif re.match(r'^\d{4}-\d\d-\d\d ',l):
        mine=False; cur=None
    elif cur is not None and mine:
        if cur['params'] is None: cur['sql']+='\n'+l
        else: cur['params']+='\n'+l
out=[]
for e in ents:
    s=re.sub(r'^execute \S+: ','',e['sql']); s=re.sub(r'^statement: ','',s)
    out.append((s,e['params']))
st=out
def sub(sql, params):
    for k in sorted(params, key=lambda k:-k):
        sql=sql.replace('$%d'%k, params[k])
    return sql
def clean(sql):
    # pgbench: one statement per line unless ended by ';' -- join lines
    return re.sub(r'\s+',' ',sql).strip()
BEGIN='BEGIN ISOLATION LEVEL REPEATABLE READ READ ONLY;'
hdr='''-- %s
-- The statements cairn serve sent to PostgreSQL for one request of this
-- kind (taken from the server's statement log, log_statement = all, on
-- 2026-12-03), its parameters made pgbench variables, for the floor of
-- docs/performance.md ("The register on the web under load"). Run with
-- -M prepared (pgx prepares and caches its statements too), the sessions
-- as serve opens them (PGOPTIONS='-c jit=off -c default_transaction_read_only=on')
-- and, for
-- cairn_national_1m's invented marks TC-0000000 ... (mark id = number + 1):
--   %s
'''
state=clean(st[35][0])
# --- mark page
m=[hdr%("A mark page, /marks/{designation}: the register's state (the ETag), then the page's snapshot.",
 "pgbench -n -M prepared -f mark.sql -D marks=1000000 -c 64 -j 2 -T 30 DB"),
 '\\set i random(0, :marks - 1)', '\\set id :i + 1',
 BEGIN, state+';', 'COMMIT;', BEGIN, state+';']
m.append(clean(sub(st[39][0],{1:"('TC-' || lpad(:i::text, 7, '0'))"}))+';')
for i in (40,42,43): m.append(clean(sub(st[i][0],{1:':id'}))+';')
m.append(clean(sub(st[41][0],{1:':id',2:'0',3:'NULL',4:'NULL'}))+';')
for i in (44,45): m.append(clean(sub(st[i][0],{1:'ARRAY[:id::bigint]'}))+';')
m.append('-- the mark\'s position for the near marks (cairn has it from the mark\'s row; an extra look-up by key here)')
m.append('SELECT lat, lon FROM mark WHERE id = :id \\gset')
near=st[46][0]
near=near.replace('point(-108.01041594263398, 38.768756795362755)','point(:lon::float8 - 0.01153594263398, :lat::float8 - 0.008993204637245)')
near=near.replace('point(-107.98734405736602, 38.78674320463724)','point(:lon::float8 + 0.01153594263398, :lat::float8 + 0.008993204637245)')
assert '-108.01' not in near
m.append('SELECT array_agg(id) AS near FROM ('+clean(sub(near,{1:':lon::float8',2:':lat::float8',3:'64'}))+') q \\gset')
m.append(clean(sub(st[47][0],{1:':lat::float8',2:':lon::float8',3:'1000',4:':near::bigint[]'}))+';')
m.append(clean(sub(st[48][0],{1:':id',2:'0'}))+';')
for i in (49,50): m.append(clean(sub(st[i][0],{1:'ARRAY[:id::bigint]'}))+';')
m.append('COMMIT;')
open('mark.sql','w').write('\n'.join(m)+'\n')
# --- bbox
b=[hdr%("A GIS client's bbox query, /collections/marks/items?bbox=...&limit=L&f=json: the state (the ETag), then the page's snapshot.",
 "pgbench -n -M prepared -f bbox.sql -D west=-108 -D south=38 -D east=-99.8 -D north=44.3 -D box=0.05 -D limit=100 -c 64 -j 2 -T 30 DB"),
 '\\set w :west + random(0, 1000000) * (:east - :west - :box) / 1000000.0',
 '\\set s :south + random(0, 1000000) * (:north - :south - :box) / 1000000.0',
 '\\set e :w + :box', '\\set n :s + :box', '\\set more :limit + 1',
 BEGIN, state+';', 'COMMIT;', BEGIN, state+';']
box={1:"''",2:':more',3:':w::float8',4:':s::float8',5:':e::float8',6:':n::float8'}
b.append(clean(sub(st[57][0],box))+';')
b.append("-- the page's marks' ids for the next statements (cairn has them from the rows above; the same box again by the index here)")
b.append(clean("SELECT array_agg(id) AS ids FROM (SELECT id FROM mark WHERE designation > '' AND lat IS NOT NULL AND point(lon, lat) <@ box(point(:w::float8, :s::float8), point(:e::float8, :n::float8)) ORDER BY designation LIMIT :limit) q \\gset"))
for i in (58,59,60):
    p={1:':ids::bigint[]'}
    if st[i][1] and '$2' in st[i][1]:
        p[2]=re.search(r"\$2 = ('[^']*'|NULL)", st[i][1]).group(1)
    b.append(clean(sub(st[i][0],p))+';')
b.append('COMMIT;')
open('bbox.sql','w').write('\n'.join(b)+'\n')
