"""Vocabulary extension mechanics: word counts against the tokenizer library's own pre-tokeniser, the choice rule,
the extended tokenizer's behaviour, and the new embedding rows."""

from __future__ import annotations

from collections import Counter

import pytest
import torch
from transformers import AutoTokenizer, BertConfig, BertForMaskedLM, PreTrainedTokenizerFast

from adapt.common.errors import InputError
from adapt.config.vocab import WordRuleConfig
from adapt.training.vocab import (ChosenWord, WordCounts, choose_words, count_words, domain_ratio, extend_embeddings,
                                  extend_tokenizer, require_wordpiece, rule_tally)

TEXTS = ["The lessee paid the arrears; the lessee's surety, Dr. Ölund, signed.",
         "Arrears of RENT-2024 were claimed by the lessee under clause 7b.",
         "The surety disputed the arrears before the court.",
         "Lessee and lessor settled the arrears in court."]


@pytest.fixture
def tok(tiny_encoder):
    return AutoTokenizer.from_pretrained(tiny_encoder)


def _rule(**kw) -> WordRuleConfig:
    base = dict(max_new_tokens=100, min_count=1, min_docs=1, min_pieces=2, min_chars=1, letters_only=True,
                max_capitalised_share=0.9, min_domain_ratio=4.0)
    base.update(kw)
    return WordRuleConfig(**base)


def test_word_counts_match_the_tokenizer_library_pre_tokenizer(tok):
    counts = count_words(tok, [TEXTS[:2], TEXTS[2:]], batch_docs=3)
    # reference: the tokenizers library's own normaliser + pre-tokeniser, applied word by word (common practice:
    # a fast tokenizer's words are what its pre-tokeniser returns)
    backend = tok.backend_tokenizer
    ref, ref_docs = Counter(), Counter()
    for text in TEXTS:
        words = [w for w, _ in backend.pre_tokenizer.pre_tokenize_str(backend.normalizer.normalize_str(text))]
        ref.update(words)
        ref_docs.update(set(words))
    assert counts.count == ref and counts.docs == ref_docs
    assert counts.total_words == sum(ref.values()) and counts.total_docs == len(TEXTS)
    for word, pieces in counts.pieces.items():  # the pieces are what the tokenizer makes of the word alone
        assert list(pieces) == tok(word, add_special_tokens=False)["input_ids"]
    assert "olund" in counts.count  # normalised as the uncased tokenizer normalises (lower case, accents stripped)


def test_max_docs_bounds_the_counted_documents(tok):
    counts = count_words(tok, [TEXTS[:3], TEXTS[3:]], max_docs=2)
    assert counts.total_docs == 2 and counts.docs["lessee"] == 2


def test_choice_rule_filters_and_ranks_by_tokens_saved(tok):
    counts = count_words(tok, [TEXTS])
    known = set(tok.get_vocab())
    chosen = choose_words(counts, _rule(min_count=2, min_docs=2, min_chars=4), known)
    words = [c.word for c in chosen]
    assert "the" not in words and "court" not in words  # one piece already: known tokens
    assert all(counts.count[w] >= 2 and counts.docs[w] >= 2 and len(w) >= 4 for w in words)
    assert "surety" in words and "olund" not in words  # olund: one document only
    # rank by count x (pieces - 1), ties by the word (hand-computed from the counts)
    expected = sorted((w for w in counts.count if counts.count[w] >= 2 and counts.docs[w] >= 2 and len(w) >= 4
                       and w not in known and len(counts.pieces[w]) >= 2),
                      key=lambda w: (-counts.count[w] * (len(counts.pieces[w]) - 1), w))
    assert words == expected
    assert chosen[0].tokens_saved == counts.count[words[0]] * (len(counts.pieces[words[0]]) - 1)
    assert [c.word for c in choose_words(counts, _rule(min_count=2, min_docs=2, max_new_tokens=2), known)] == \
        expected[:2]


def test_letters_only_keeps_out_numbers_and_codes():
    counts = WordCounts(Counter({"abc123": 9, "rent2024": 9, "lessee": 9}), Counter({"abc123": 9, "rent2024": 9,
                        "lessee": 9}), {"abc123": (1, 2, 3), "rent2024": (1, 2), "lessee": (4, 5)}, 27, 9)
    assert [c.word for c in choose_words(counts, _rule(), set())] == ["lessee"]
    assert rule_tally(counts, _rule(), set()) == {"letters_only": 2, "passed": 1}
    assert rule_tally(counts, _rule(min_docs=10), {"lessee"}) == {"min_docs": 2, "passed": 0}
    assert {c.word for c in choose_words(counts, _rule(letters_only=False), set())} == {"abc123", "rent2024",
                                                                                        "lessee"}


def test_domain_ratio_is_the_add_one_rate_ratio_and_filters():
    domain = WordCounts(Counter({"lessee": 30, "house": 20}), Counter({"lessee": 10, "house": 10}),
                        {"lessee": (1, 2), "house": (3, 4)}, 1000, 10)
    general = WordCounts(Counter({"house": 50}), Counter({"house": 20}), {"house": (3, 4)}, 5000, 20)
    # ((30 + 1) / 1000) / ((0 + 1) / 5000) = 155, ((20 + 1) / 1000) / ((50 + 1) / 5000) = 2.0588 (by hand)
    assert domain_ratio("lessee", domain, general) == pytest.approx(155.0)
    assert domain_ratio("house", domain, general) == pytest.approx(21 / 1000 / (51 / 5000))
    chosen = choose_words(domain, _rule(min_domain_ratio=4.0), set(), general)
    assert [c.word for c in chosen] == ["lessee"] and chosen[0].domain_ratio == pytest.approx(155.0)


def _chosen(tok, words: list[str]) -> list[ChosenWord]:
    return [ChosenWord(w, 5, 5, tuple(tok(w, add_special_tokens=False)["input_ids"]), None) for w in words]


def test_extended_tokenizer_matches_whole_words_only(tok, tmp_path):
    base = AutoTokenizer.from_pretrained(tok.name_or_path)
    words = _chosen(tok, ["lessee", "arrears"])
    new_ids = extend_tokenizer(tok, words)
    assert sorted(new_ids.values()) == [len(base), len(base) + 1]
    enc = tok("The LESSEE paid the Arrears.", add_special_tokens=False)  # matched after lower-casing
    assert enc["input_ids"][1] == new_ids["lessee"] and enc["input_ids"][-2] == new_ids["arrears"]
    assert enc.tokens()[2:-2] == base("paid the", add_special_tokens=False).tokens()  # the rest as before
    # inside a longer word the added token is not matched (AddedToken single_word): same ids as the base tokenizer
    for text in ("The lessees paid sublessee arrearsx.", "The court dismissed the appeal."):
        assert tok(text)["input_ids"] == base(text)["input_ids"]
    tok.save_pretrained(tmp_path / "tok")
    again = AutoTokenizer.from_pretrained(tmp_path / "tok")
    assert again("the lessee")["input_ids"] == tok("the lessee")["input_ids"]


def _tiny_mlm(vocab_size: int, tie: bool) -> BertForMaskedLM:
    torch.manual_seed(0)
    config = BertConfig(vocab_size=vocab_size, hidden_size=16, num_hidden_layers=1, num_attention_heads=2,
                        intermediate_size=32, tie_word_embeddings=tie)
    return BertForMaskedLM(config)


@pytest.mark.parametrize("tie", [True, False])
def test_new_rows_start_at_the_mean_of_their_pieces(tok, tie):
    model = _tiny_mlm(len(tok), tie)
    old_in = model.get_input_embeddings().weight.detach().clone()
    old_out = model.get_output_embeddings().weight.detach().clone()
    old_bias = model.get_output_embeddings().bias.detach().clone()
    words = _chosen(tok, ["lessee", "arrears", "surety"])
    new_ids = extend_tokenizer(tok, words)
    extend_embeddings(model, words, new_ids)
    emb, out = model.get_input_embeddings().weight, model.get_output_embeddings()
    n = old_in.shape[0]
    assert emb.shape[0] == n + 3 and out.weight.shape[0] == n + 3 and out.bias.shape[0] == n + 3
    assert model.config.vocab_size == n + 3
    assert torch.equal(emb[:n], old_in) and torch.equal(out.weight[:n], old_out) and torch.equal(out.bias[:n],
                                                                                                  old_bias)
    assert (out.weight.data_ptr() == emb.data_ptr()) == tie  # tying survives the resize
    for w in words:
        pieces = list(w.pieces)
        assert torch.allclose(emb[new_ids[w.word]], old_in[pieces].mean(0))
        assert torch.allclose(out.weight[new_ids[w.word]], old_out[pieces].mean(0))
        assert torch.allclose(out.bias[new_ids[w.word]], old_bias[pieces].mean())


def test_extension_leaves_old_logits_unchanged(tok):
    model = _tiny_mlm(len(tok), True).eval()
    ids = tok("the court dismissed the appeal", return_tensors="pt")["input_ids"]
    with torch.no_grad():
        before = model(input_ids=ids).logits
    words = _chosen(tok, ["lessee", "arrears"])
    extend_embeddings(model, words, extend_tokenizer(tok, words))
    with torch.no_grad():
        after = model(input_ids=ids).logits
    assert after.shape[-1] == before.shape[-1] + 2
    assert torch.allclose(after[..., :before.shape[-1]], before, atol=1e-6)


def test_refuses_a_tokenizer_that_is_not_wordpiece():
    from tokenizers import Tokenizer, models, pre_tokenizers

    bpe = Tokenizer(models.BPE(vocab={"a": 0, "b": 1, "<unk>": 2}, merges=[], unk_token="<unk>"))
    bpe.pre_tokenizer = pre_tokenizers.Whitespace()
    with pytest.raises(InputError, match="BPE.*WordPiece"):
        require_wordpiece(PreTrainedTokenizerFast(tokenizer_object=bpe), "encoder.name_or_path=x")


def test_a_padded_matrix_gives_its_unused_rows_to_the_new_ids(tok):
    model = _tiny_mlm(len(tok) + 5, True)  # rows beyond the tokenizer's last id, as in vocabularies padded to 8
    old_in = model.get_input_embeddings().weight.detach().clone()
    words = _chosen(tok, ["lessee", "arrears"])
    new_ids = extend_tokenizer(tok, words)
    assert max(new_ids.values()) < old_in.shape[0]
    extend_embeddings(model, words, new_ids)
    emb = model.get_input_embeddings().weight
    assert emb.shape == old_in.shape  # no growth needed
    for w in words:
        assert torch.allclose(emb[new_ids[w.word]], old_in[list(w.pieces)].mean(0))
    untouched = [i for i in range(old_in.shape[0]) if i not in new_ids.values()]
    assert torch.equal(emb[untouched], old_in[untouched])


def test_a_word_capitalised_inside_sentences_is_taken_for_a_name(tok):
    texts = ["Counsel for Marsk said the lessee paid. Lessee and Marsk agreed.",
             "The lessee wrote to Marsk. Marsk replied: Lessee must pay.",
             "Marsk and the lessee met; marsk is spelt in lower case once here."]
    counts = count_words(tok, [texts])
    # inside a sentence (counted by hand): Marsk 3 times capitalised ("for", "and", "to" before it) and once in
    # lower case (after ";"); "Marsk replied" and the third text's "Marsk and" open sentences and do not count,
    # nor do "Lessee and" and "Lessee must" (after "." and ":"); lessee 3 times inside, never capitalised there
    assert (counts.inside["marsk"], counts.capitalised["marsk"]) == (4, 3)
    assert (counts.inside["lessee"], counts.capitalised["lessee"]) == (3, 0)
    assert counts.capitalised_share("marsk") == pytest.approx(0.75)
    chosen = {c.word for c in choose_words(counts, _rule(max_capitalised_share=0.7), set(tok.get_vocab()))}
    assert "lessee" in chosen and "marsk" not in chosen
    chosen = {c.word for c in choose_words(counts, _rule(max_capitalised_share=1.0), set(tok.get_vocab()))}
    assert {"lessee", "marsk"} <= chosen  # 1.0 turns the rule off
