"""A small list of common given names from many languages, for spotting personal names.

Why embedded and small: the screen only needs to notice that a column *looks like* people's
names ("Amara Okafor", "Smith, John"); it does not need to recognise every name. The list is a
fact of the languages (common practice), chosen to avoid words that are also ordinary English
words, months or common place names (no "May", "Will", "Grace", "Victoria", "Jordan"), so that
district and site names in aggregate tables are not mistaken for people.
"""
from __future__ import annotations

GIVEN_NAMES = frozenset("""
james john robert michael william david richard joseph thomas charles christopher daniel
matthew anthony steven andrew paul joshua kenneth kevin brian george timothy ronald jason
edward jeffrey ryan jacob gary nicholas eric jonathan stephen larry justin scott brandon
benjamin samuel gregory alexander patrick dennis jerry tyler aaron henry peter
mary patricia jennifer linda elizabeth barbara susan jessica sarah karen lisa nancy betty
margaret sandra ashley kimberly emily donna michelle carol amanda melissa deborah stephanie
rebecca sharon laura cynthia kathleen amy angela shirley anna brenda pamela emma nicole
helen samantha katherine christine debra rachel carolyn janet catherine maria heather diane
olivia sophia isabella charlotte amelia harper evelyn abigail liam noah oliver elijah lucas
mason logan ethan aiden
jose juan carlos luis miguel pedro jorge alejandro diego javier fernando ricardo manuel
sofia lucia carmen isabel marta elena valentina camila gabriela paula beatriz ines joao
francisco antonio rafael mariana leticia
giuseppe giovanni marco luca matteo alessandro francesca giulia chiara federica paolo
hans klaus jurgen stefan andreas wolfgang ursula monika petra sabine heike lukas
lars anders erik nils ingrid astrid sven karin bjorn magnus freya sigrid
pierre jean marie louis camille chloe julien nicolas amelie mathieu sebastien
ivan dmitri dmitry sergei sergey olga natasha tatiana irina svetlana vladimir aleksandr
alexei yulia anastasia piotr katarzyna agnieszka tomasz krzysztof malgorzata jan pieter
sanne daan bram femke
mohammed muhammad mohamed ahmed ali omar fatima aisha hassan hussein layla yusuf zainab
mustafa ibrahim khadija mariam youssef karim samir rania leila nadia tariq imran bilal
mehmet ayse emine ahmet elif zeynep
raj priya amit anjali rahul sunita arjun deepak lakshmi vikram kavya ravi neha sanjay
pooja anil suresh meena arun divya rohan aditya
wei ming jing xiu hui lei yang xiaoming fang hiroshi yuki takashi haruto yui sakura
kenji akiko takeshi yoko minjun jiwoo seoyeon jiho hyun minh linh thanh tuan huong
kwame kofi ama abena kwabena akosua chinedu ngozi oluwaseun adebayo amara chioma emeka
thandiwe sipho themba nomvula zanele tendai wanjiru otieno achieng baraka njeri kamau
aroha tane mele sione leilani keanu malia moana
""".split())

# Words that mark a person's name column when they qualify "name" (patient_name, mother_name).
PERSON_WORDS = frozenset("""
patient person first last given family full middle maiden mother father child baby
participant subject respondent contact doctor physician nurse staff employee owner client
member parent guardian spouse partner caregiver carer author surgeon clinician reporter
interviewer resident student teacher customer user next kin
""".split())
