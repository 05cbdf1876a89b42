"""One-off probe, not part of the product: can any rule that chooses or
averages models per product on the backtest beat `ets-auto` applied to every
product on the generated health set's hidden year (WAPE against true demand)?

For each data set the last H months are hidden (series realigned as in
local_weights_probe.py; the generated sets keep their common end and are
scored against `true_demand` summed over sites). `provisio forecast` runs
once on the rest with every model's backtest written (`--backtest-detail
all`, `--default-model best-five-mean`) and once per model pinned for every
product that has the history for it, so each model's projection of the
hidden months is known. Rules then choose per product from the backtest
(scaled absolute error per origin, scale: the training part's
seasonal-naive in-sample MAE) and are scored on the hidden months: mean MASE,
WAPE and bias, over products not classed intermittent (those keep the run's
own choice). Rules: the mean of the best k (k = 1..7), the median of the best
3/5/7, rankings weighted to recent origins (decay 0.9, 0.8 per origin), on
the last 6 or 3 origins only, by the median or a trimmed mean over origins,
a pool of models within 5/10/20% of the best, the best k of the six strong
automatic models or of the combination's three members, `ets-auto` for every
product leaving it only for a model more than 10..50% better on the backtest,
and an oracle that knows the hidden months and takes the better of
`ets-auto` and the combination per product (a bound, not a rule).

Usage: python3 benches/accuracy/selection_rules_probe.py DATA.csv H TAG [TRUTH_COLUMN]
(needs numpy; results: benches/accuracy/selection_rules_probe.txt)."""

import csv, sys, os, subprocess, collections, pickle
data, h, tag = sys.argv[1], int(sys.argv[2]), sys.argv[3]
truth_col = sys.argv[4] if len(sys.argv) > 4 else None
ROOT=os.path.abspath(os.path.join(os.path.dirname(__file__),'..','..'))
B=f'{ROOT}/target/release/provisio'; W=f'{ROOT}/target/accuracy/rules_{tag}'; os.makedirs(W, exist_ok=True)
MODELS=['ets-auto','arima-auto','theta','mstl-ets','holt-winters-additive','holt-winters-additive-damped','holt-winters-multiplicative','holt-winters-multiplicative-damped','ets-simple','ets-holt','ets-damped','seasonal-naive','naive','moving-average-3','moving-average-6','moving-average-12','combination','croston-sba']
rows=list(csv.DictReader(open(data)))
agg=collections.defaultdict(lambda: collections.defaultdict(float)); tr=collections.defaultdict(lambda: collections.defaultdict(float))
for r in rows:
    if r['consumed']!='': agg[r['product']][r['month']]+=float(r['consumed'])
    if truth_col and r.get(truth_col): tr[r['product']][r['month']]+=float(r[truth_col])
def ym(s): y,m=s.split('-'); return int(y)*12+int(m)-1
def fmt(k): return f'{k//12:04d}-{k%12+1:02d}'
END=ym('2010-12')
trunc=os.path.join(W,'train.csv'); hidden={}
if truth_col:
    months=sorted({r['month'] for r in rows}); cut=months[-h]
    with open(trunc,'w') as f:
        w=csv.writer(f); w.writerow(rows[0].keys())
        for r in rows:
            if r['month']<cut: w.writerow(r.values())
    for p in agg: hidden[p]=[tr[p].get(m) for m in months[-h:]]
else:
    with open(trunc,'w') as f:
        f.write('product,month,consumed\n')
        for p,d in agg.items():
            ms=sorted(d); vals=[d[m] for m in ms]
            tv=vals[:-h]; hidden[p]=vals[-h:]
            n=len(tv)
            for i,v in enumerate(tv): f.write(f'"{p}",{fmt(END-h-n+1+i)},{v}\n')
def run(out, extra):
    if not os.path.exists(f'{out}/forecast.csv'):
        subprocess.run([B,'forecast',trunc,'--out',out,'--overwrite','--quiet','--no-report','--no-workbook','--horizon',str(h)]+extra,check=True,stderr=subprocess.DEVNULL)
run(f'{W}/base',['--backtest-detail','all','--default-model','best-five-mean'])
sel={r['product']:r for r in csv.DictReader(open(f'{W}/base/selection.csv'))}
prods=sorted(sel)
NEED24={'seasonal-naive','holt-winters-additive','holt-winters-additive-damped','holt-winters-multiplicative','holt-winters-multiplicative-damped','mstl-ets','arima-auto'}
n_train=collections.Counter(); pos={}
for r in csv.DictReader(open(f'{W}/base/cleaned.csv')):
    n_train[r['product']]+=1; pos[r['product']]=pos.get(r['product'],True) and float(r['cleaned'])>0
proj={}
for m in MODELS:
    with open(f'{W}/pin.csv','w') as f:
        need=24 if m in NEED24 else 15 if m=='moving-average-12' else 9
        f.write('product,model\n'); [f.write(f'"{p}",{m}\n') for p in prods if n_train[p]>=need and (not m.startswith('holt-winters-multiplicative') or pos[p])]
    run(f'{W}/pin_{m}',['--pin',f'{W}/pin.csv'])
    for r in csv.DictReader(open(f'{W}/pin_{m}/forecast.csv')):
        if r['model']==m: proj.setdefault((m,r['product']),[]).append(float(r['forecast']))
for r in csv.DictReader(open(f'{W}/base/forecast.csv')):
    proj.setdefault(('selected',r['product']),[]).append(float(r['forecast']))
cl=collections.defaultdict(list)
for r in csv.DictReader(open(f'{W}/base/cleaned.csv')): cl[r['product']].append(float(r['cleaned']))
bt=collections.defaultdict(dict); act={}
for r in csv.DictReader(open(f'{W}/base/backtest.csv')):
    if r['scored']!='yes': continue
    k=(r['product'],r['origin'],r['month']); bt[k][r['model']]=float(r['forecast']); act[k]=float(r['actual'])
import numpy as np
CAND=[m for m in MODELS if m not in ('combination','croston-sba')]
STRONG=['ets-auto','arima-auto','theta','mstl-ets','holt-winters-additive-damped','holt-winters-multiplicative-damped']
def scale(y):
    d=[abs(y[i]-y[i-12]) for i in range(12,len(y))]; s=sum(d)/len(d) if d else 0
    return s if s>0 else None
per=collections.defaultdict(lambda: collections.defaultdict(lambda: collections.defaultdict(list)))
for (p,o,mo),v in bt.items():
    for m,f in v.items(): per[p][m][o].append(abs(f-act[(p,o,mo)]))
P={}
for p in sel:
    s=scale(cl.get(p,[]))
    if not s or ('selected',p) not in proj: continue
    inter=sel[p]['chosen_model'].startswith(('croston','tsb'))
    origins=sorted(per[p]['ets-auto']) if 'ets-auto' in per[p] else []
    ms=[m for m in CAND if (m,p) in proj and m in per[p] and sorted(per[p][m])==origins]
    E=np.array([[np.mean(per[p][m][o])/s for o in origins] for m in ms]) if origins and ms else None
    btm={m:np.mean([x for o in per[p][m] for x in per[p][m][o]]) for m in per[p]}
    P[p]=dict(s=s,inter=inter or E is None,ms=ms,E=E,hidden=hidden[p],btm=btm)
def score(fc):
    mases=[];num=den=sgn=0
    for p,d in P.items():
        f=fc(p,d); pairs=[(x,y) for x,y in zip(f,d['hidden']) if y is not None]
        if not pairs: continue
        mases.append(sum(abs(x-y) for x,y in pairs)/len(pairs)/d['s'])
        num+=sum(abs(x-y) for x,y in pairs); den+=sum(y for _,y in pairs); sgn+=sum(x-y for x,y in pairs)
    return np.mean(mases),100*num/den,100*sgn/den
def own(p): return proj[('selected',p)]
def fixed(m): return lambda p,d: proj[(m,p)] if (m,p) in proj and not d['inter'] else own(p)
def bestk(k, agg='mean', decay=1.0, last=None, pool=None, rob=None, among=None):
    def fc(p,d):
        if d['inter']: return own(p)
        idx=[i for i,m in enumerate(d['ms']) if among is None or m in among]
        if not idx: return own(p)
        E=d['E'][idx]
        if last: E=E[:,-last:]
        n=E.shape[1]; w=decay**np.arange(n-1,-1,-1); sc=(E*w).sum(1)/w.sum()
        if rob=='median': sc=np.median(E,1)
        elif rob is not None: sc=np.sort(E,1)[:,:n-rob].mean(1)
        o=np.argsort(sc,kind='stable')
        ch=[i for i in o if sc[i]<=sc[o[0]]*(1+pool)][:k] if pool is not None else o[:k]
        F=np.array([proj[(d['ms'][idx[i]],p)] for i in ch])
        return np.median(F,0) if agg=='median' else F.mean(0)
    return fc
def depart(m,margin):
    def fc(p,d):
        if d['inter'] or (m,p) not in proj or m not in d['btm']: return own(p)
        best=min((d['btm'][c],c) for c in CAND+['combination'] if c in d['btm'] and (c,p) in proj)
        return proj[(best[1],p)] if best[0]<d['btm'][m]*(1-margin) else proj[(m,p)]
    return fc
def oracle(p,d):
    if d['inter'] or ('ets-auto',p) not in proj or ('combination',p) not in proj: return own(p)
    c=[proj[('ets-auto',p)],proj[('combination',p)]]
    e=[sum(abs(x-y) for x,y in zip(f,d['hidden']) if y is not None) for f in c]
    return c[int(np.argmin(e))]
rules=[('the run (best-five-mean)',lambda p,d: own(p)),('ets-auto for every product',fixed('ets-auto')),('combination for every product',fixed('combination'))]
rules+=[(f'mean of best {k}',bestk(k)) for k in range(1,8)]
rules+=[(f'median of best {k}',bestk(k,'median')) for k in (3,5,7)]
rules+=[(f'best 5, origins decay {x}',bestk(5,decay=x)) for x in (0.9,0.8)]
rules+=[(f'best 5, last {x} origins',bestk(5,last=x)) for x in (6,3)]
rules+=[('best 5, median over origins',bestk(5,rob='median')),('best 5, worst 2 origins dropped',bestk(5,rob=2))]
rules+=[(f'pool within {int(x*100)}% (max 5)',bestk(5,pool=x)) for x in (0.05,0.1,0.2)]
rules+=[(f'best {k} of six strong',bestk(k,among=STRONG)) for k in (1,2,3)]
rules+=[(f'best {k} of ets/arima/theta',bestk(k,among=STRONG[:3])) for k in (1,2)]
rules+=[(f'ets-auto unless {int(x*100)}% beaten',depart('ets-auto',x)) for x in (0.5,0.3,0.1)]
rules+=[('oracle: better of ets-auto/combination',oracle)]
print(f'{tag}: {sum(1 for d in P.values() if not d["inter"])} products chosen by rule, {sum(1 for d in P.values() if d["inter"])} intermittent keep the run\'s choice')
print(f'  {"rule":40s} {"MASE":>7s} {"WAPE":>6s} {"bias%":>6s}')
for name,f in rules:
    m,w,b=score(f); print(f'  {name:40s} {m:7.4f} {w:6.2f} {b:6.1f}')
