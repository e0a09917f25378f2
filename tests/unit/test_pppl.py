"""Pseudo-perplexity against a brute-force reading of its definition, and the bootstrap against scipy.

Definition checked: PLL(W) = Σ_t log P(w_t | W without t), one masked copy per position, pseudo-perplexity
= exp(−ΣPLL / total tokens) (Salazar et al. 2020, "Masked Language Model Scoring", §2 eq. 1 and §2.3).
Variant PLL-word-l2r: when scoring a token also mask the later tokens of the same word (Kauf & Ivanova 2023,
"A Better Way to Do Masked Language Model Scoring", §2).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.stats
import torch
from tests.conftest import build_tiny_encoder
from transformers import AutoModelForMaskedLM, AutoTokenizer

from adapt.common.errors import ConfigError
from adapt.evaluation.pppl import (DocScores, bootstrap_ci, position_log_probs, pseudo_perplexity, score_documents)

TEXTS = [
    "the tenant gave notice to the landlord",
    "the court dismissed the appeal; judgment for the landlord",
    "patient moved to ward 4, nurse reduced the dose",
    "rent of 1200 claimed for six months under clause 7",
    "scan report",
]
# ~90 tokens: split into several windows at max_seq_len=16 (14 content tokens per window)
LONG_TEXT = "the tenancy agreement was terminated by notice, and the landlord claimed unpaid rent of 4500"


@pytest.fixture(scope="module", autouse=True)
def one_thread():
    # The tiny model's ops are too small to gain from threads; on a busy 2-core machine a second thread made
    # each forward ~10x slower. Restored afterwards for the other test modules.
    before = torch.get_num_threads()
    torch.set_num_threads(1)
    yield
    torch.set_num_threads(before)


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    folder = build_tiny_encoder(tmp_path_factory.mktemp("pppl") / "enc")
    model = AutoModelForMaskedLM.from_pretrained(folder, dtype=torch.float32)
    model.eval()
    # A freshly initialised BERT (std 0.02) predicts almost uniformly whatever the context, so a scorer that masks
    # the wrong positions would still pass; seeded noise on the weight matrices makes predictions context-dependent
    # (word_l2r and token then differ by ~0.4 nats on LONG_TEXT instead of ~1e-4).
    g = torch.Generator().manual_seed(0)
    with torch.no_grad():
        for p in model.parameters():
            if p.dim() == 2:
                p.add_(torch.randn(p.shape, generator=g) * 0.1)
    return model, AutoTokenizer.from_pretrained(folder)


def brute_windows(n, cap, stride):
    """Per content position p of an n-token document: the start of the window that scores it.

    The documented rule, written out in plain Python: window starts 0, stride, 2*stride, ... while the window does
    not reach the end, then one window ending at the document's end; each token is scored in the window that gives
    it the most context on its shorter side (ties: the earlier window).
    """
    if n <= cap:
        return [0] * n
    starts = list(range(0, n - cap, stride)) + [n - cap]
    chosen = []
    for p in range(n):
        best = max((min(p - s, s + cap - 1 - p), -s) for s in starts if s <= p < s + cap)
        chosen.append(-best[1])
    return chosen


def brute_force(model, tok, text, max_seq_len, variant="token", stride=None):
    """(PLL, scored tokens) by the definition: one full forward per position, plain Python, no batching.

    Windows as documented in adapt.evaluation.pppl: each token is scored inside a window of max_seq_len - 2
    document tokens framed by [CLS] ... [SEP], chosen by brute_windows; stride None = half a window.
    """
    enc = tok(text, add_special_tokens=False)
    ids, words = enc["input_ids"], enc.word_ids()
    cap = max_seq_len - 2
    total, count = 0.0, 0
    for p, s in enumerate(brute_windows(len(ids), cap, stride or cap // 2)):
        if ids[p] in tok.all_special_ids:
            continue
        seq = [tok.cls_token_id] + ids[s:s + cap] + [tok.sep_token_id]
        seq_words = [None] + words[s:s + cap] + [None]
        t = p - s + 1
        masked = list(seq)
        masked[t] = tok.mask_token_id
        if variant == "word_l2r":
            for j in range(t + 1, len(seq) - 1):
                if seq_words[j] == seq_words[t]:
                    masked[j] = tok.mask_token_id
        with torch.no_grad():
            logits = model(torch.tensor([masked])).logits[0, t]
        total += torch.log_softmax(logits, dim=-1)[seq[t]].item()
        count += 1
    return total, count


@pytest.mark.parametrize("stride", [1, 5, 14])
def test_strided_windows_match_the_brute_force_definition(tiny, stride):
    # stride 1: every token in the window centred on it (as much context on both sides as the document allows);
    # stride 14 = the window's capacity: consecutive, non-overlapping windows
    model, tok = tiny
    scores = score_documents(model, tok, [LONG_TEXT, TEXTS[0]], max_seq_len=16, batch_size=7, window_stride=stride)
    expected = [brute_force(model, tok, t, 16, stride=stride) for t in (LONG_TEXT, TEXTS[0])]
    np.testing.assert_allclose(scores.pll, [e[0] for e in expected], rtol=0, atol=1e-5)
    assert scores.tokens.tolist() == [e[1] for e in expected]


def test_default_stride_gives_every_token_context_on_both_sides(tiny):
    # half-window stride: a token has at least a quarter of a window on each side unless the document ends first
    _, tok = tiny
    n, cap = len(tok(LONG_TEXT, add_special_tokens=False)["input_ids"]), 14
    for p, s in enumerate(brute_windows(n, cap, cap // 2)):
        assert min(p - s, s + cap - 1 - p) >= min(p, n - 1 - p, (cap - cap // 2) // 2)
    # the non-overlapping windows of earlier versions left tokens at a window's edge with one-sided context
    edge = [min(p - s, s + cap - 1 - p) for p, s in enumerate(brute_windows(n, cap, cap))]
    assert any(m == 0 and 0 < p < n - 1 for p, m in enumerate(edge))


@pytest.mark.parametrize("variant", ["token", "word_l2r"])
def test_matches_brute_force_definition(tiny, variant):
    model, tok = tiny
    texts = TEXTS + [LONG_TEXT]
    scores = score_documents(model, tok, texts, max_seq_len=16, batch_size=7, variant=variant)
    expected = [brute_force(model, tok, t, 16, variant) for t in texts]
    assert scores.n_windows > len(texts)  # the long text really was split
    np.testing.assert_allclose(scores.pll, [e[0] for e in expected], rtol=0, atol=1e-5)
    assert scores.tokens.tolist() == [e[1] for e in expected]
    ref = math.exp(-sum(e[0] for e in expected) / sum(e[1] for e in expected))
    assert pseudo_perplexity(scores) == pytest.approx(ref, rel=1e-6)


def test_word_l2r_differs_from_token_on_multi_piece_words(tiny):
    model, tok = tiny
    text = "tenancy terminated"  # not whole words in the tiny vocabulary: many pieces each
    assert len(tok(text, add_special_tokens=False)["input_ids"]) > 2
    a = score_documents(model, tok, [text], max_seq_len=32, variant="token")
    b = score_documents(model, tok, [text], max_seq_len=32, variant="word_l2r")
    assert a.tokens[0] == b.tokens[0]
    assert abs(a.pll[0] - b.pll[0]) > 1e-2


def test_batch_size_does_not_change_scores(tiny):
    model, tok = tiny
    texts = TEXTS + [LONG_TEXT]
    one = score_documents(model, tok, texts, max_seq_len=16, batch_size=1)
    seven = score_documents(model, tok, texts, max_seq_len=16, batch_size=7)
    assert one.tokens.tolist() == seven.tokens.tolist()
    # batches differ in padding, so float sums may differ in the last bits only
    np.testing.assert_allclose(one.pll, seven.pll, rtol=0, atol=1e-5)


def test_special_tokens_are_never_scored(tiny):
    model, tok = tiny
    plain = "the tenant gave notice"
    with_unknown = "the tenant € gave notice"  # € is not in the tiny vocabulary: [UNK]
    scores = score_documents(model, tok, [plain, with_unknown], max_seq_len=32)
    n_plain = len(tok(plain)["input_ids"]) - 2  # BERT adds [CLS] and [SEP]
    assert scores.tokens.tolist() == [n_plain, n_plain]
    assert scores.skipped_special == 1


def test_masked_only_head_equals_full_forward(tiny):
    model, tok = tiny
    g = torch.Generator().manual_seed(0)
    ids = torch.randint(5, len(tok), (6, 12), generator=g)
    positions = torch.randint(1, 11, (6,), generator=g)
    targets = ids[torch.arange(6), positions].clone()
    ids[torch.arange(6), positions] = tok.mask_token_id
    attention = torch.ones_like(ids)
    attention[3:, 11] = 0  # some padding
    fast = position_log_probs(model, ids, attention, positions, targets, masked_head_only=True)
    full = position_log_probs(model, ids, attention, positions, targets, masked_head_only=False)
    torch.testing.assert_close(fast, full, rtol=0, atol=1e-6)
    a = score_documents(model, tok, TEXTS, max_seq_len=16, masked_head_only=True)
    b = score_documents(model, tok, TEXTS, max_seq_len=16, masked_head_only=False)
    np.testing.assert_allclose(a.pll, b.pll, rtol=0, atol=1e-5)


def _tiny_roberta():
    """A RoBERTa-like MLM (byte-level BPE, <s> ... </s>, head named lm_head, positions offset by padding_idx)."""
    from tokenizers import ByteLevelBPETokenizer
    from tokenizers.processors import RobertaProcessing
    from transformers import PreTrainedTokenizerFast, RobertaConfig, RobertaForMaskedLM

    bpe = ByteLevelBPETokenizer()
    bpe.train_from_iterator(TEXTS * 3, vocab_size=300, min_frequency=1,
                            special_tokens=["<s>", "<pad>", "</s>", "<unk>", "<mask>"])
    bpe._tokenizer.post_processor = RobertaProcessing(("</s>", bpe.token_to_id("</s>")),
                                                      ("<s>", bpe.token_to_id("<s>")))
    tok = PreTrainedTokenizerFast(tokenizer_object=bpe._tokenizer, bos_token="<s>", eos_token="</s>", cls_token="<s>",
                                  sep_token="</s>", pad_token="<pad>", unk_token="<unk>", mask_token="<mask>")
    config = RobertaConfig(vocab_size=len(tok), hidden_size=32, num_hidden_layers=2, num_attention_heads=2,
                           intermediate_size=64, max_position_embeddings=34, pad_token_id=tok.pad_token_id)
    torch.manual_seed(0)
    return RobertaForMaskedLM(config).eval(), tok


def test_roberta_like_head_frame_and_position_limit():
    model, tok = _tiny_roberta()
    texts = TEXTS[:3]
    fast = score_documents(model, tok, texts, max_seq_len=16, masked_head_only=True)
    full = score_documents(model, tok, texts, max_seq_len=16, masked_head_only=False)
    np.testing.assert_allclose(fast.pll, full.pll, rtol=0, atol=1e-5)
    # every token of the text is scored, <s> and </s> are not (one window each here)
    assert fast.tokens.tolist() == [len(tok(t, add_special_tokens=False)["input_ids"]) for t in texts]
    # 34 position embeddings minus the padding offset (padding_idx 1 + 1) leave 32 usable positions
    with pytest.raises(ConfigError, match=r"encoder.max_seq_len=33 .*\(32\)"):
        score_documents(model, tok, texts, max_seq_len=33)


def test_bf16_close_to_fp32(tiny):
    model, tok = tiny
    fp32 = pseudo_perplexity(score_documents(model, tok, TEXTS, max_seq_len=32, precision="fp32"))
    bf16 = pseudo_perplexity(score_documents(model, tok, TEXTS, max_seq_len=32, precision="bf16"))
    assert math.isfinite(bf16) and bf16 == pytest.approx(fp32, rel=0.05)  # bf16 keeps ~3 significant digits


def test_token_budget_cuts_the_crossing_document_and_drops_later_ones(tiny):
    model, tok = tiny
    full = score_documents(model, tok, TEXTS, max_seq_len=32)
    budget = int(full.tokens[0] + 3)  # all of document 0 and three tokens of document 1
    cut = score_documents(model, tok, TEXTS, max_seq_len=32, max_tokens=budget)
    assert cut.total_tokens == budget
    assert cut.tokens.tolist() == [full.tokens[0], 3]
    assert cut.cut.tolist() == [False, True]
    assert cut.pll[0] == pytest.approx(full.pll[0], abs=1e-6)


def test_model_mode_is_restored_and_bad_settings_refused(tiny):
    model, tok = tiny
    model.train()
    try:
        score_documents(model, tok, ["the court"], max_seq_len=16)
        assert model.training
    finally:
        model.eval()
    with pytest.raises(ConfigError, match="encoder.max_seq_len=256"):  # tiny model: 128 positions
        score_documents(model, tok, ["the court"], max_seq_len=256)
    with pytest.raises(ConfigError, match="variant='word'"):
        score_documents(model, tok, ["the court"], max_seq_len=16, variant="word")


def _synthetic_docs(n, seed):
    rng = np.random.default_rng(seed)
    tokens = rng.integers(5, 200, size=n)  # very unequal document lengths
    nll_per_token = rng.gamma(4.0, 0.5, size=n)  # per-document difficulty
    return -nll_per_token * tokens, tokens


def test_bootstrap_contains_estimate_and_narrows_with_more_documents():
    widths = []
    for n in (20, 400):
        pll, tok = _synthetic_docs(n, seed=1)
        estimate = math.exp(-pll.sum() / tok.sum())
        low, high = bootstrap_ci(pll, tok, bootstrap_resamples=2000, seed=0, confidence=0.95)
        assert low < estimate < high
        widths.append(high - low)
    assert widths[1] < widths[0] / 2  # ~1/sqrt(n): 20 -> 400 documents should shrink it ~4.5x


def test_bootstrap_is_seeded_and_level_sets_width():
    pll, tok = _synthetic_docs(60, seed=2)
    assert bootstrap_ci(pll, tok, 500, seed=3) == bootstrap_ci(pll, tok, 500, seed=3)
    assert bootstrap_ci(pll, tok, 500, seed=3) != bootstrap_ci(pll, tok, 500, seed=4)
    low90, high90 = bootstrap_ci(pll, tok, 4000, seed=3, confidence=0.90)
    low99, high99 = bootstrap_ci(pll, tok, 4000, seed=3, confidence=0.99)
    assert low99 < low90 and high90 < high99


def test_bootstrap_matches_scipy_percentile_bootstrap():
    # Reference: scipy.stats.bootstrap(method="percentile", paired=True) on the same ratio statistic
    # (Efron & Tibshirani 1993, §13.3 percentile interval). Both are Monte Carlo: with 20,000 resamples each,
    # the endpoints' sampling error is ~4% of the interval width; allow 15%.
    pll, tok = _synthetic_docs(80, seed=5)

    def ratio(p, t, axis=-1):
        return np.exp(-p.sum(axis=axis) / t.sum(axis=axis))

    ref = scipy.stats.bootstrap((pll, tok.astype(float)), ratio, paired=True, vectorized=True,
                                n_resamples=20000, confidence_level=0.95, method="percentile",
                                rng=np.random.default_rng(11)).confidence_interval
    low, high = bootstrap_ci(pll, tok, bootstrap_resamples=20000, seed=0, confidence=0.95)
    width = ref.high - ref.low
    assert abs(low - ref.low) < 0.15 * width
    assert abs(high - ref.high) < 0.15 * width


def test_bootstrap_and_pppl_refuse_empty_input():
    with pytest.raises(ValueError):
        bootstrap_ci(np.array([]), np.array([]), 100, seed=0)
    empty = DocScores(pll=np.zeros(1), tokens=np.zeros(1, dtype=np.int64), cut=np.zeros(1, dtype=bool),
                      variant="token", skipped_special=0, n_windows=0, seconds=0.0)
    with pytest.raises(ValueError, match="no scored tokens"):
        pseudo_perplexity(empty)
