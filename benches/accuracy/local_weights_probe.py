"""One-off probe, not part of the product: weights learned for each product
on the backtests of the K products most like it (nearest in two features:
yearly log growth and the lag-12 autocorrelation of the cleaned history;
local cross-learning in the spirit of feature-based weighting, FFORMA,
Montero-Manso et al., IJF 36(1), 2020, and of forecasting from similar
series, Kang et al., "Deja vu", 2021) against one set of weights for all.

The last H months of every series are hidden (series realigned to end in
one month, values and order unchanged, so one `provisio forecast` run
serves all; with a truth column the generated set's common end is kept and
the hidden months are scored against the true demand). The rest is
forecast once with every model's backtest written and once per model
pinned for every product; weights come from forward selection with
replacement (20 steps, mean scaled absolute error, as src/weights.rs) over
the candidates and the fixed combination. Scores: mean MASE (scale: the
training part's seasonal-naive in-sample MAE) and WAPE on the hidden
months, products not classed intermittent.

Usage: python3 benches/accuracy/local_weights_probe.py DATA.csv H TAG [TRUTH_COLUMN]
(needs numpy; results: benches/accuracy/local_weights_probe.txt)."""
import csv, sys, os, subprocess, collections, math, numpy as np
data, h, tag = sys.argv[1], int(sys.argv[2]), sys.argv[3]
truth_col = sys.argv[4] if len(sys.argv) > 4 else None
ROOT=os.path.abspath(os.path.join(os.path.dirname(__file__),'..','..'))
B=f'{ROOT}/target/release/provisio'; W=f'{ROOT}/target/accuracy/probe_{tag}'; os.makedirs(W, exist_ok=True)
MODELS=['ets-auto','arima-auto','theta','mstl-ets','holt-winters-additive','holt-winters-additive-damped','holt-winters-multiplicative','holt-winters-multiplicative-damped','ets-simple','ets-holt','ets-damped','seasonal-naive','naive','moving-average-3','moving-average-6','moving-average-12','combination']
series=collections.defaultdict(list); truthv=collections.defaultdict(dict)
rows=list(csv.DictReader(open(data)))
has_site='site' in rows[0]
agg=collections.defaultdict(lambda: collections.defaultdict(float)); tr=collections.defaultdict(lambda: collections.defaultdict(float))
for r in rows:
    if r['consumed']!='': agg[r['product']][r['month']]+=float(r['consumed'])
    if truth_col and r.get(truth_col): tr[r['product']][r['month']]+=float(r[truth_col])
def ym(s): y,m=s.split('-'); return int(y)*12+int(m)-1
def fmt(k): return f'{k//12:04d}-{k%12+1:02d}'
END=ym('2010-12')
trunc=os.path.join(W,'train.csv'); hidden={}; train={}
if truth_col:
    # generated: common end already; keep raw rows for training months, truth for hidden
    months=sorted({r['month'] for r in rows}); cut=months[-h]
    with open(trunc,'w') as f:
        w=csv.writer(f); w.writerow(rows[0].keys())
        for r in rows:
            if r['month']<cut: w.writerow(r.values())
    for p in agg:
        hidden[p]=[tr[p].get(m) for m in months[-h:]]
        train[p]=None
    first_hidden=cut
else:
    with open(trunc,'w') as f:
        f.write('product,month,consumed\n')
        for p,d in agg.items():
            ms=sorted(d); vals=[d[m] for m in ms]
            tv=vals[:-h]; hidden[p]=vals[-h:]; train[p]=tv
            n=len(tv)
            for i,v in enumerate(tv):
                f.write(f'"{p}",{fmt(END-h-n+1+i)},{v}\n')
    first_hidden=fmt(END-h+1)
def run(out, extra):
    if not os.path.exists(f'{out}/forecast.csv'):
        subprocess.run([B,'forecast',trunc,'--out',out,'--overwrite','--quiet','--no-report','--no-workbook','--horizon',str(h)]+extra,check=True,stderr=subprocess.DEVNULL)
run(f'{W}/base',['--backtest-detail','all'])
prods=sorted({r['product'] for r in csv.DictReader(open(f'{W}/base/selection.csv'))})
sel={r['product']:r for r in csv.DictReader(open(f'{W}/base/selection.csv'))}
proj={}
for m in MODELS:
    with open(f'{W}/pin.csv','w') as f:
        f.write('product,model\n'); [f.write(f'"{p}",{m}\n') for p in prods]
    run(f'{W}/pin_{m}',['--pin',f'{W}/pin.csv'])
    for r in csv.DictReader(open(f'{W}/pin_{m}/forecast.csv')):
        if r['model']==m: proj.setdefault((m,r['product']),[]).append(float(r['forecast']))
cl=collections.defaultdict(list)
for r in csv.DictReader(open(f'{W}/base/cleaned.csv')): cl[r['product']].append(float(r['cleaned']))
def scale(y):
    d=[abs(y[i]-y[i-12]) for i in range(12,len(y))]; s=sum(d)/len(d) if d else 0
    return s if s>0 else None
sc={p:scale(cl[p]) for p in prods}
bt=collections.defaultdict(dict); act={}
for r in csv.DictReader(open(f'{W}/base/backtest.csv')):
    if r['scored']!='yes': continue
    k=(r['product'],r['origin'],r['month']); bt[k][r['model']]=float(r['forecast']); act[k]=float(r['actual'])
smooth=[p for p in prods if not sel[p]['chosen_model'].startswith(('croston','tsb')) and sc[p] and all((m,p) in proj for m in ['ets-auto','theta','arima-auto','combination'])]
P={}
for k,v in bt.items():
    p=k[0]
    if p in smooth and all(m in v for m in MODELS): P.setdefault(p,[]).append(([v[m] for m in MODELS], act[k], 1/sc[p]))
ps=[p for p in smooth if p in P]
arr={p:(np.array([r[0] for r in P[p]]).T,np.array([r[1] for r in P[p]]),np.array([r[2] for r in P[p]])) for p in ps}
def fs(idx,steps=20):
    F=np.concatenate([arr[ps[i]][0] for i in idx],axis=1); A=np.concatenate([arr[ps[i]][1] for i in idx]); S=np.concatenate([arr[ps[i]][2] for i in idx])
    s=np.zeros(F.shape[1]); cnt=collections.Counter()
    for t in range(1,steps+1):
        e=(np.abs((s+F)/t-A)*S).sum(1); j=int(np.argmin(e)); s+=F[j]; cnt[MODELS[j]]+=1
    return cnt
def feats(p):
    y=np.array(cl[p]); n=len(y); a=y[:12].sum(); b=y[-12:].sum()
    g=math.log(b/a)*12/(n-12) if a>0 and b>0 and n>12 else 0
    z=y-y.mean(); acf=(z[12:]*z[:-12]).sum()/max((z*z).sum(),1e-9)
    return [g,acf]
X=np.array([feats(p) for p in ps]); X=(X-X.mean(0))/np.where(X.std(0)>0,X.std(0),1)
def fc_of(w,p):
    tot=sum(w.values()); comb=proj[('combination',p)]
    return [sum(c*(proj.get((m,p)) or comb)[i] for m,c in w.items())/tot for i in range(h)]
def score(fcf):
    mases=[]; num=den=0
    for p in ps:
        f=fcf(p); a=hidden[p]; s=sc[p]
        pairs=[(x,y) for x,y in zip(f,a) if y is not None]
        if not pairs: continue
        mases.append(sum(abs(x-y) for x,y in pairs)/len(pairs)/s)
        num+=sum(abs(x-y) for x,y in pairs); den+=sum(y for _,y in pairs)
    return np.mean(mases), 100*num/den
res={}
for m in ['ets-auto','combination','theta','arima-auto']:
    res[m]=score(lambda p: proj[(m,p)])
g=fs(range(len(ps))); res['global']=score(lambda p: fc_of(g,p))
for K in [15,30,60]:
    Wl={}
    for i,p in enumerate(ps):
        d=((X-X[i])**2).sum(1); nn=np.argsort(d,kind='stable')[:K]; Wl[p]=fs(nn)
    res[f'knn{K}']=score(lambda p: fc_of(Wl[p],p))
print(tag, len(ps), 'products; global', dict(g))
for k,(m,wp) in res.items(): print(f'  {k:12s} MASE {m:.4f}  WAPE {wp:.2f}')
