"""Writes notebooks/walkthrough.ipynb (kept as code so the notebook's source is reviewable).

Run: python notebooks/make_walkthrough.py
"""

from pathlib import Path

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

cells = [
    new_markdown_cell(
        "# splitter walkthrough: from records to a methods appendix\n\n"
        "This notebook uses the Python API on the bundled **invented** scenario (an imaginary beetle in a "
        "synthetic landscape; see `demo_data/README.md`). It designs spatially independent folds, uses them in a "
        "scikit-learn `cross_val_score`, audits the dependence that is left, tests each fold's predictions, "
        "and writes the appendix. Outputs go to a temporary folder."
    ),
    new_code_cell(
        "import tempfile\nfrom pathlib import Path\n\nimport numpy as np\nimport splitter\n\n"
        "DATA = Path('..') / 'demo_data'\n"
        "ENV = [DATA / 'temperature.tif', DATA / 'moisture.tif', DATA / 'canopy.tif']\n"
        "RUN = Path(tempfile.mkdtemp(prefix='splitter-walkthrough-'))\n"
        "records = splitter.read_records(DATA / 'records_with_background.csv')\n"
        "records.counts()"
    ),
    new_markdown_cell("## 1. How far does the environment stay alike? The autocorrelation range"),
    new_code_cell(
        "rng = splitter.estimate_range(ENV, sample=2000, seed=1)\n"
        "print(f'suggested block size: {rng.suggested_block_km:.1f} km')\n"
        "rng.to_frame()"
    ),
    new_markdown_cell(
        "## 2. Design folds: spatial blocks of that size, with a buffer of the same width\n\n"
        "A random split is made too, as the dependent baseline to compare against."
    ),
    new_code_cell(
        "size = rng.suggested_block_km\n"
        "blocks = splitter.design(records, method='blocks', folds=5, block_size=size, buffer=size, env=ENV, seed=1)\n"
        "random_split = splitter.design(records, method='random', folds=5, env=ENV, seed=1)\n"
        "blocks.counts()"
    ),
    new_markdown_cell(
        "## 3. Use the folds in scikit-learn\n\n"
        "`as_cv()` follows scikit-learn's splitter protocol. `X` has one row per record-table row; dropped "
        "rows are in no fold, so their missing covariates never reach the model."
    ),
    new_code_cell(
        "from sklearn.linear_model import LogisticRegression\n"
        "from sklearn.model_selection import cross_val_score\n"
        "from sklearn.pipeline import make_pipeline\n"
        "from sklearn.preprocessing import PolynomialFeatures, StandardScaler\n"
        "from splitter.io.rasters import sample_rasters\n\n"
        "X, _ = sample_rasters(ENV, records.points)\n"
        "y = (records.kind == 'presence').astype(int)\n"
        "model = make_pipeline(StandardScaler(), PolynomialFeatures(2), LogisticRegression(class_weight='balanced', max_iter=2000))\n"
        "auc_blocks = cross_val_score(model, X, y, cv=blocks.as_cv(), scoring='roc_auc')\n"
        "auc_random = cross_val_score(model, X, y, cv=random_split.as_cv(), scoring='roc_auc')\n"
        "print('AUC per fold, blocks:', np.round(auc_blocks, 3))\n"
        "print('AUC per fold, random:', np.round(auc_random, 3))"
    ),
    new_markdown_cell(
        "### A GeoDataFrame in, the splitter object as `cv=`, results as a DataFrame\n\n"
        "Each method is also a class that follows scikit-learn's splitter protocol. It takes a GeoDataFrame "
        "(or a DataFrame with longitude/latitude columns) as `X`; the pipeline picks its feature columns, "
        "the splitter reads the coordinates. With `env=` the rule drops records without covariate values, "
        "as `design()` does."
    ),
    new_code_cell(
        "import geopandas as gpd\n"
        "import pandas as pd\n"
        "from sklearn.compose import ColumnTransformer\n\n"
        "df = pd.read_csv(DATA / 'records_with_background.csv')\n"
        "gdf = gpd.GeoDataFrame(df, geometry=gpd.points_from_xy(df.longitude, df.latitude), crs='EPSG:4326')\n"
        "covs = [p.stem for p in ENV]\n"
        "gdf[covs] = sample_rasters(ENV, splitter.Points.lonlat(gdf.geometry.x.to_numpy(), gdf.geometry.y.to_numpy()))[0]\n"
        "y_gdf = (gdf['kind'] == 'presence').astype(int)\n"
        "frame_model = make_pipeline(ColumnTransformer([('env', StandardScaler(), covs)]), PolynomialFeatures(2),\n"
        "                            LogisticRegression(class_weight='balanced', max_iter=2000))\n"
        "rules = {'blocks': splitter.SpatialBlocks(folds=5, block_size=size, buffer=size, env=ENV, seed=1),\n"
        "         'random': splitter.RandomFolds(folds=5, env=ENV, seed=1)}\n"
        "print(rules['blocks'])\n"
        "auc = pd.DataFrame({name: cross_val_score(frame_model, gdf, y_gdf, cv=rule, scoring='roc_auc')\n"
        "                    for name, rule in rules.items()}, index=pd.RangeIndex(1, 6, name='fold'))\n"
        "auc.round(3)"
    ),
    new_code_cell(
        "# The same folds as a table with geometry (numeric columns stay numeric)\n"
        "splitter.design(gdf, method='blocks', folds=5, block_size=size, buffer=size, env=ENV, seed=1)"
        ".to_geodataframe()[['record_id', 'kind', 'year', 'fold', 'geometry']].head()"
    ),
    new_markdown_cell("## 4. Audit: how much dependence is left between calibration and evaluation data?"),
    new_code_cell(
        "audit_blocks, ctx_blocks = splitter.audit(blocks, env=ENV, range_km=size, seed=1)\n"
        "audit_random, ctx_random = splitter.audit(random_split, env=ENV, range_km=size, seed=1)\n"
        "print('blocks:', audit_blocks.verdict, '| random:', audit_random.verdict)\n"
        "audit_blocks.to_frame()[['fold', 'n_evaluation', 'nn_median_km', 'share_within_range', 'schoener_d', 'verdict']]"
    ),
    new_markdown_cell(
        "## 5. Significance first, then performance\n\n"
        "The built-in baseline model is fitted per fold on that fold's calibration records only. Any "
        "scikit-learn estimator with `predict_proba` can be passed as `model=` instead."
    ),
    new_code_cell(
        "ev_blocks = splitter.evaluate(blocks, model='baseline', env=ENV, replicates=300, seed=1,\n"
        "                              prediction_dir=RUN / 'blocks' / 'evaluation' / 'predictions')\n"
        "ev_blocks.to_frame()[['fold', 'significant', 'interpretation', 'binomial_p', 'partial_roc_p', 'auc_ratio_mean', 'tss']]"
    ),
    new_code_cell(
        "ev_random = splitter.evaluate(random_split, model=model, env=ENV, replicates=300, seed=1,\n"
        "                              prediction_dir=RUN / 'random' / 'evaluation' / 'predictions')\n"
        "ev_random.to_frame()[['fold', 'significant', 'binomial_p', 'partial_roc_p', 'auc_ratio_mean', 'tss']]"
    ),
    new_markdown_cell("## 6. Write the run and the methods appendix"),
    new_code_cell(
        "from splitter.report.outputs import write_audit, write_evaluation, write_range\n\n"
        "write_range(rng, RUN / 'range')\n"
        "for name, a, au, ctx, ev in [('blocks', blocks, audit_blocks, ctx_blocks, ev_blocks),\n"
        "                             ('random', random_split, audit_random, ctx_random, ev_random)]:\n"
        "    splitter.write_design(a, RUN / name / 'folds.csv')\n"
        "    write_audit(au, ctx, RUN / name / 'audit')\n"
        "    write_evaluation(ev, RUN / name / 'evaluation')\n"
        "appendix = splitter.build_appendix(RUN, RUN / 'appendix')\n"
        "print(appendix.html)"
    ),
    new_markdown_cell(
        "Open `appendix.html` in a browser. Remember: evaluation describes the records used; a significant, "
        "well-performing fold does not make a model fit for a decision."
    ),
]
nb = new_notebook(cells=cells, metadata={"kernelspec": {"name": "python3", "display_name": "Python 3", "language": "python"}})
Path(__file__).with_name("walkthrough.ipynb").write_text(nbformat.writes(nb))
