"""One-off probe, not part of the product: would weights learned per group
of products (grouped by a growth feature, as feature-based weighting in the
manner of FFORMA, Montero-Manso et al., IJF 36(1), 2020, does with many
features) beat `ets-auto` on the generated sets' true demand?

For a generated seed (benches/accuracy/run.sh writes them to
target/accuracy/), the first 48 months are forecast with every model's
backtest written (--backtest-detail all) and then once per model pinned
for every product; weights are learned by forward selection with
replacement (20 steps, mean scaled absolute error, as src/weights.rs does)
on the backtest points, for all products at once, for two fixed groups
(the last 12 months of the history more than 25% above or 20% below the
first 12, against the rest) and for groups split at quantiles of the
yearly log growth; each is scored by WAPE against the true demand of the
12 hidden months, over the products not classed intermittent.
Usage: python3 benches/accuracy/grouped_weights_probe.py SEED
(results: benches/accuracy/grouped_weights_probe.txt)."""
import csv, sys, collections, math, subprocess, os
ROOT=os.path.abspath(os.path.join(os.path.dirname(__file__),'..','..'))
seed=sys.argv[1]; data=f'{ROOT}/target/accuracy/generated_seed{seed}.csv'
B=f'{ROOT}/target/release/provisio'; W=f'{ROOT}/target/accuracy/probe_s{seed}'
os.makedirs(W,exist_ok=True)
MODELS=['ets-auto','arima-auto','theta','mstl-ets','holt-winters-additive','holt-winters-additive-damped','holt-winters-multiplicative','holt-winters-multiplicative-damped','ets-simple','ets-holt','ets-damped','seasonal-naive','naive','moving-average-3','moving-average-6','moving-average-12','combination']
if not os.path.exists(f'{W}/base/backtest.csv'):
    subprocess.run([B,'forecast',data,'--until','2024-12','--out',f'{W}/base','--overwrite','--quiet','--no-report','--no-workbook','--backtest-detail','all'],check=True)
prods=sorted({r['product'] for r in csv.DictReader(open(f'{W}/base/selection.csv'))})
proj={}
for m in MODELS:
    d=f'{W}/pin_{m}'
    if not os.path.exists(f'{d}/forecast.csv'):
        with open(f'{W}/pin.csv','w') as f:
            f.write('product,model\n'); [f.write(f'"{p}",{m}\n') for p in prods]
        subprocess.run([B,'forecast',data,'--until','2024-12','--out',d,'--overwrite','--quiet','--no-report','--no-workbook','--pin',f'{W}/pin.csv'],check=True,stderr=subprocess.DEVNULL)
    for r in csv.DictReader(open(f'{d}/forecast.csv')):
        if r['month']<='2025-12' and r.get('model')==m:
            proj[(m,r['product'],r['month'])]=float(r['forecast'])
truth=collections.defaultdict(float)
for r in csv.DictReader(open(data)):
    if '2025-01'<=r['month']<='2025-12' and r['true_demand']:
        truth[(r['product'],r['month'])]+=float(r['true_demand'])
# backtest points
sel={r['product']:r for r in csv.DictReader(open(f'{W}/base/selection.csv'))}
bt=collections.defaultdict(dict)  # (product,origin,month)->{model:fc}, actual
act={}
for r in csv.DictReader(open(f'{W}/base/backtest.csv')):
    if r['scored']!='yes': continue
    k=(r['product'],r['origin'],r['month']); bt[k][r['model']]=float(r['forecast']); act[k]=float(r['actual'])
cl=collections.defaultdict(list)
for r in csv.DictReader(open(f'{W}/base/cleaned.csv')): cl[r['product']].append(float(r['cleaned']))
def scale(p):
    y=cl[p]; d=[abs(y[i]-y[i-12]) for i in range(12,len(y))]; s=sum(d)/len(d) if d else 0
    return s if s>0 else None
sc={p:scale(p) for p in prods}
smooth=[p for p in prods if not sel[p]['chosen_model'].startswith(('croston','tsb')) and sc[p] and all((m,p,'2025-01') in proj for m in ['ets-auto','theta','arima-auto'])]
def growth(p):
    y=cl[p]; a=sum(y[:12]); b=sum(y[-12:]); return b/a if a>0 else 9
def learn(ps, steps=20):
    pts=[(k,v) for k,v in bt.items() if k[0] in ps and all(m in v for m in MODELS)]
    members=[]; cur=[0.0]*len(pts)
    for s in range(steps):
        best=None
        for m in MODELS:
            err=0
            for i,(k,v) in enumerate(pts):
                f=(cur[i]*s+v[m])/(s+1); err+=abs(f-act[k])/sc[k[0]]
            if best is None or err<best[0]: best=(err,m)
        members.append(best[1])
        for i,(k,v) in enumerate(pts): cur[i]=(cur[i]*s+v[best[1]])/(s+1)
    return collections.Counter(members)
def wape_on(ps, fc):
    num=den=0
    for p in ps:
        for mo in range(1,13):
            month=f'2025-{mo:02d}'; t=truth.get((p,month))
            if t is None: continue
            num+=abs(fc(p,month)-t); den+=t
    return 100*num/den, num
def wape(fc):  # fc: (p,month)->value
    return wape_on(smooth, fc)[0]
def mix(w):
    tot=sum(w.values())
    return lambda p,mo: sum(c*proj.get((m,p,mo), proj[('combination',p,mo)]) for m,c in w.items())/tot
print('seed',seed,'products',len(smooth))
for m in ['ets-auto','combination','theta','arima-auto']:
    print(f'{m:14s} WAPE {wape(lambda p,mo: proj[(m,p,mo)]):.2f}')
g=learn(set(smooth)); print('global', dict(g), f'WAPE {wape(mix(g)):.2f}')
# grouped by growth
fast=[p for p in smooth if growth(p)>1.25 or growth(p)<0.8]; slow=[p for p in smooth if p not in fast]
print('groups', len(fast), len(slow))
wf=learn(set(fast)) if len(fast)>=30 else g; ws=learn(set(slow)) if len(slow)>=30 else g
print('fast', dict(wf)); print('slow', dict(ws))
fs=set(fast); mf=mix(wf); ms=mix(ws)
print(f'grouped WAPE {wape(lambda p,mo: mf(p,mo) if p in fs else ms(p,mo)):.2f}')
for name,ps in [('fast',fast),('slow',slow)]:
    row=[name]
    for lab,fc in [('ets',lambda p,mo: proj[('ets-auto',p,mo)]),('comb',lambda p,mo: proj[('combination',p,mo)]),('global',mix(g)),('grouped',mf if name=='fast' else ms)]:
        w,n=wape_on(ps,fc); row.append(f'{lab} {w:.2f} ({n:.0f})')
    print(*row)
def agrowth(p):
    y=cl[p]; n=len(y); a=sum(y[:12]); b=sum(y[-12:])
    if a<=0 or b<=0: return 9.0
    return abs(math.log(b/a))*12/(n-12)
vals=sorted(agrowth(p) for p in smooth)
for q in [2,3]:
    cuts=[vals[len(vals)*i//q] for i in range(1,q)]
    grp=lambda p: sum(agrowth(p)>=c for c in cuts)
    groups=collections.defaultdict(list)
    for p in smooth: groups[grp(p)].append(p)
    ws={k:(learn(set(v)) if len(v)>=30 else g) for k,v in groups.items()}
    mixes={k:mix(w) for k,w in ws.items()}
    print(f'quantile groups {q}: sizes', {k:len(v) for k,v in sorted(groups.items())}, f'WAPE {wape(lambda p,mo: mixes[grp(p)](p,mo)):.2f}')
    for k in sorted(ws): print('  ',k, dict(ws[k]))
